#include "stepledger/engine/spill.h"

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <algorithm>
#include <atomic>
#include <cerrno>
#include <cstring>
#include <mutex>
#include <random>
#include <stdexcept>

#include "stepledger/engine/errors.h"
#include "stepledger/engine/number_format.h"

namespace stepledger {
namespace {

constexpr std::uint64_t kMagic = 0x314C4C4950534C53ULL;  // "SLSPILL1" little-endian
constexpr std::size_t kHeaderWords = 4;

// ---- the registry that a signal handler empties ---------------------------------------------
// Fixed storage, filled outside the handler: the handler only reads it and calls unlink/rmdir,
// both async-signal-safe. A slot is a folder and the files made in it.
constexpr int kSlots = 16;
constexpr int kFilesPerSlot = 64;
constexpr std::size_t kPathBytes = 512;

struct RegistrySlot {
  std::atomic<bool> used{false};
  char folder[kPathBytes];
  std::atomic<int> files{0};
  char file[kFilesPerSlot][kPathBytes];
};
RegistrySlot g_registry[kSlots];
std::mutex g_registry_mutex;

bool CopyPath(char* destination, const std::filesystem::path& path) {
  const std::string& text = path.native();
  if (text.size() + 1 > kPathBytes) return false;
  std::memcpy(destination, text.c_str(), text.size() + 1);
  return true;
}

int RegisterFolder(const std::filesystem::path& folder) {
  std::lock_guard lock(g_registry_mutex);
  for (int slot = 0; slot < kSlots; ++slot) {
    if (g_registry[slot].used.load()) continue;
    if (!CopyPath(g_registry[slot].folder, folder)) return -1;
    g_registry[slot].files.store(0);
    g_registry[slot].used.store(true);
    return slot;
  }
  return -1;  // more than kSlots spills at once: removed by their destructors only
}

void RegisterFile(int slot, const std::filesystem::path& file) {
  if (slot < 0) return;
  std::lock_guard lock(g_registry_mutex);
  RegistrySlot& entry = g_registry[slot];
  const int index = entry.files.load();
  if (index >= kFilesPerSlot || !CopyPath(entry.file[index], file)) return;
  entry.files.store(index + 1);
}

void ReleaseSlot(int slot) {
  if (slot < 0) return;
  std::lock_guard lock(g_registry_mutex);
  g_registry[slot].used.store(false);
}

std::string SizeInMegabytes(std::uint64_t bytes) {
  return FormatCount(static_cast<std::int64_t>((bytes + (1 << 20) - 1) >> 20)) + " MB";
}

}  // namespace

void RemoveSpillFilesNow() noexcept {
  for (RegistrySlot& slot : g_registry) {
    if (!slot.used.load()) continue;
    const int files = slot.files.load();
    for (int i = 0; i < files; ++i) ::unlink(slot.file[i]);
    ::rmdir(slot.folder);
  }
}

// ---- SpillFolder ------------------------------------------------------------------------------

SpillFolder::SpillFolder(const std::filesystem::path& work_dir)
    : work_dir_(work_dir.empty() ? std::filesystem::temp_directory_path() : work_dir) {
  std::random_device entropy;
  for (int attempt = 0; attempt < 16; ++attempt) {
    char name[64];
    std::snprintf(name, sizeof name, "stepledger-spill-%ld-%08x", static_cast<long>(::getpid()),
                  static_cast<unsigned>(entropy()));
    std::filesystem::path candidate = work_dir_ / name;
    if (::mkdir(candidate.c_str(), 0700) == 0) {
      path_ = std::move(candidate);
      registry_slot_ = RegisterFolder(path_);
      return;
    }
    if (errno != EEXIST) {
      throw InputError("cannot create the working folder for the typed copy of the rows in '" +
                       work_dir_.string() + "': " + std::strerror(errno) +
                       " (choose another with --work-dir)");
    }
  }
  throw InputError("cannot create a working folder in '" + work_dir_.string() +
                   "': every name tried exists (choose another with --work-dir)");
}

SpillFolder::~SpillFolder() {
  for (const auto& file : files_) ::unlink(file.c_str());
  ::rmdir(path_.c_str());
  ReleaseSlot(registry_slot_);
}

std::filesystem::path SpillFolder::NewFile(const std::string& name) {
  std::filesystem::path file = path_ / name;
  std::lock_guard lock(mutex_);
  files_.push_back(file);
  RegisterFile(registry_slot_, file);
  return file;
}

// ---- Spill --------------------------------------------------------------------------------------

Spill::Spill(std::unique_ptr<SpillFolder> folder, std::vector<SpillRange> ranges, std::size_t columns,
             SpillSource source)
    : Spill(std::move(folder), std::move(ranges), columns, std::vector<SpillSource>{std::move(source)}) {}

Spill::Spill(std::unique_ptr<SpillFolder> folder, std::vector<SpillRange> ranges, std::size_t columns,
             std::vector<SpillSource> sources)
    : folder_(std::move(folder)), ranges_(std::move(ranges)), columns_(columns), sources_(std::move(sources)) {
  if (sources_.empty()) throw std::logic_error("Spill: no source (a bug)");
  for (const SpillRange& range : ranges_) {
    if (range.source >= sources_.size()) throw std::logic_error("Spill: a range names a source it lacks (a bug)");
  }
}

std::uint64_t Spill::rows() const {
  std::uint64_t total = 0;
  for (const SpillRange& range : ranges_) total += range.rows;
  return total;
}

std::uint64_t Spill::chunk_count() const {
  std::uint64_t total = 0;
  for (const SpillRange& range : ranges_) total += range.chunks.size();
  return total;
}

std::uint64_t Spill::bytes() const {
  std::uint64_t total = 0;
  for (const SpillRange& range : ranges_) {
    std::error_code error;
    const auto size = std::filesystem::file_size(range.file, error);
    if (!error) total += size;
  }
  return total;
}

// ---- SpillWriter --------------------------------------------------------------------------------

SpillWriter::SpillWriter(std::filesystem::path file, std::filesystem::path work_dir, std::size_t columns)
    : file_(std::move(file)), work_dir_(std::move(work_dir)), columns_(columns),
      chunk_rows_(SpillChunkRowsFor(columns)) {
  fd_ = ::open(file_.c_str(), O_WRONLY | O_CREAT | O_TRUNC | O_CLOEXEC, 0600);
  if (fd_ < 0) {
    throw InputError("cannot write the typed copy of the rows in '" + work_dir_.string() + "': " +
                     std::strerror(errno) + " (choose another folder with --work-dir)");
  }
  lines_.resize(chunk_rows_);
  offsets_.resize(chunk_rows_);
  values_.resize(columns_ * chunk_rows_);
  codes_.resize(columns_ * chunk_rows_);
  has_codes_.assign(columns_, 0);
}

SpillWriter::~SpillWriter() {
  if (fd_ >= 0) ::close(fd_);
}

void SpillWriter::BeginRow(std::uint64_t line, std::uint64_t offset) {
  lines_[rows_in_chunk_] = line;
  offsets_[rows_in_chunk_] = offset;
}

void SpillWriter::EndRow() {
  ++rows_;
  if (++rows_in_chunk_ == chunk_rows_) FlushChunk();
}

std::uint64_t SpillWriter::BytesFor(std::uint64_t total_rows) const {
  return total_rows * (16 + 12 * static_cast<std::uint64_t>(columns_));
}

void SpillWriter::WriteAll(const void* data, std::size_t bytes) {
  const char* next = static_cast<const char*>(data);
  while (bytes > 0) {
    const ssize_t put = ::write(fd_, next, bytes);
    if (put < 0 && errno == EINTR) continue;
    if (put <= 0) {
      const int error = put < 0 ? errno : ENOSPC;
      const std::uint64_t needed = BytesFor(std::max(estimated_total_rows_, rows_));
      throw InputError("cannot write the typed copy of the rows in '" + work_dir_.string() + "': " +
                       std::strerror(error) + " after " + SizeInMegabytes(written_) +
                       "; this data set needs about " + SizeInMegabytes(needed) +
                       " there (choose a folder with room using --work-dir)");
    }
    next += put;
    bytes -= static_cast<std::size_t>(put);
    written_ += static_cast<std::uint64_t>(put);
  }
}

void SpillWriter::FlushChunk() {
  if (rows_in_chunk_ == 0) return;
  const std::size_t rows = rows_in_chunk_;
  std::size_t code_columns = 0;
  for (std::size_t c = 0; c < columns_; ++c) code_columns += has_codes_[c] != 0;
  const std::size_t code_words = (code_columns * rows * 4 + 7) / 8;
  const std::size_t payload_words = 2 * rows + columns_ + columns_ * rows + code_words;
  out_.resize((kHeaderWords + payload_words) * 8);
  char* out = out_.data();
  const std::uint64_t header[kHeaderWords] = {kMagic, rows, columns_, payload_words * 8};
  auto put = [&out](const void* data, std::size_t bytes) {
    std::memcpy(out, data, bytes);
    out += bytes;
  };
  put(header, sizeof header);
  put(lines_.data(), rows * 8);
  put(offsets_.data(), rows * 8);
  put(has_codes_.data(), columns_ * 8);
  for (std::size_t c = 0; c < columns_; ++c) put(values_.data() + c * chunk_rows_, rows * 8);
  for (std::size_t c = 0; c < columns_; ++c) {
    if (has_codes_[c] != 0) put(codes_.data() + c * chunk_rows_, rows * 4);
  }
  std::memset(out, 0, static_cast<std::size_t>(out_.data() + out_.size() - out));
  chunks_.push_back({written_, rows});
  WriteAll(out_.data(), out_.size());
  rows_in_chunk_ = 0;
  std::fill(has_codes_.begin(), has_codes_.end(), 0);
}

std::vector<SpillChunkEntry> SpillWriter::Finish() {
  FlushChunk();
  if (fd_ >= 0) {
    const int fd = fd_;
    fd_ = -1;
    if (::close(fd) != 0) {
      throw InputError("cannot write the typed copy of the rows in '" + work_dir_.string() + "': " +
                       std::strerror(errno) + " (choose a folder with room using --work-dir)");
    }
  }
  return std::move(chunks_);
}

// ---- SpillReader --------------------------------------------------------------------------------

SpillReader::SpillReader(const Spill& spill, std::uint64_t first_chunk, std::uint64_t last_chunk)
    : spill_(spill), next_(first_chunk), last_(last_chunk) {
  // Find the range and chunk of first_chunk, and the rows before it in its range.
  std::uint64_t skip = first_chunk;
  while (range_ < spill_.ranges().size() && skip >= spill_.ranges()[range_].chunks.size()) {
    skip -= spill_.ranges()[range_].chunks.size();
    ++range_;
  }
  chunk_in_range_ = static_cast<std::size_t>(skip);
  if (range_ < spill_.ranges().size()) {
    for (std::size_t c = 0; c < chunk_in_range_; ++c) row_in_range_ += spill_.ranges()[range_].chunks[c].rows;
  }
}

SpillReader::~SpillReader() {
  if (fd_ >= 0) ::close(fd_);
}

bool SpillReader::Next(SpillChunk& chunk) {
  while (next_ < last_ && range_ < spill_.ranges().size() &&
         chunk_in_range_ >= spill_.ranges()[range_].chunks.size()) {
    ++range_;
    chunk_in_range_ = 0;
    row_in_range_ = 0;
  }
  if (next_ >= last_ || range_ >= spill_.ranges().size()) return false;
  const SpillRange& range = spill_.ranges()[range_];
  const SpillChunkEntry& entry = range.chunks[chunk_in_range_];
  if (open_range_ != range_) {
    if (fd_ >= 0) ::close(fd_);
    fd_ = ::open(range.file.c_str(), O_RDONLY | O_CLOEXEC);
    if (fd_ < 0) {
      throw NumericalError("cannot read back the typed copy of the rows '" + range.file.string() +
                           "': " + std::strerror(errno));
    }
    open_range_ = range_;
  }
  const std::size_t columns = spill_.column_count();
  const std::size_t rows = static_cast<std::size_t>(entry.rows);
  const std::size_t code_words_max = (columns * rows * 4 + 7) / 8;
  const std::size_t words = kHeaderWords + 2 * rows + columns + columns * rows + code_words_max;
  if (buffer_.size() < words) buffer_.resize(words);
  // Read the header to learn the exact payload size, then the payload.
  std::size_t bytes_wanted = kHeaderWords * 8;
  std::size_t got_total = 0;
  auto read_at = [&](std::size_t into, std::size_t bytes, std::uint64_t offset) {
    char* target = reinterpret_cast<char*>(buffer_.data()) + into;
    std::size_t done = 0;
    while (done < bytes) {
      const ssize_t got = ::pread(fd_, target + done, bytes - done, static_cast<off_t>(offset + done));
      if (got < 0 && errno == EINTR) continue;
      if (got <= 0) {
        throw NumericalError("cannot read back the typed copy of the rows '" + range.file.string() +
                             "': " + (got < 0 ? std::strerror(errno) : "it ends early"));
      }
      done += static_cast<std::size_t>(got);
    }
  };
  read_at(0, bytes_wanted, entry.file_offset);
  got_total = bytes_wanted;
  if (buffer_[0] != kMagic || buffer_[1] != entry.rows || buffer_[2] != columns ||
      buffer_[3] > (words - kHeaderWords) * 8) {
    throw NumericalError("the typed copy of the rows '" + range.file.string() + "' is damaged");
  }
  read_at(got_total, static_cast<std::size_t>(buffer_[3]), entry.file_offset + got_total);

  const std::uint64_t* word = buffer_.data() + kHeaderWords;
  chunk.rows = rows;
  chunk.range = range_;
  chunk.first_row = row_in_range_;
  chunk.columns = columns;
  chunk.lines = word;
  chunk.offsets = word + rows;
  chunk.has_codes = word + 2 * rows;
  chunk.values_base = reinterpret_cast<const double*>(word + 2 * rows + columns);
  const auto* code = reinterpret_cast<const std::uint32_t*>(word + 2 * rows + columns + columns * rows);
  chunk.codes.assign(columns, nullptr);
  for (std::size_t c = 0; c < columns; ++c) {
    if (chunk.has_codes[c] != 0) {
      chunk.codes[c] = code;
      code += rows;
    }
  }
  ++next_;
  ++chunk_in_range_;
  row_in_range_ += rows;
  return true;
}

}  // namespace stepledger
