#include "stepledger/engine/byte_source.h"

#include <fcntl.h>
#include <unistd.h>

#include <zlib.h>
#include <zstd.h>

#include <algorithm>
#include <cerrno>
#include <cstring>
#include <stdexcept>
#include <string>
#include <utility>

#include "stepledger/engine/errors.h"

namespace stepledger {
namespace {

constexpr unsigned char kGzipMagic[] = {0x1f, 0x8b};
constexpr unsigned char kZstdMagic[] = {0x28, 0xb5, 0x2f, 0xfd};

template <std::size_t N>
bool StartsWith(const char* bytes, std::size_t size, const unsigned char (&magic)[N]) {
  return size >= N && std::memcmp(bytes, magic, N) == 0;
}

}  // namespace

const char* ToString(ByteEncoding encoding) {
  switch (encoding) {
    case ByteEncoding::kPlain: return "plain";
    case ByteEncoding::kGzip: return "gzip";
    case ByteEncoding::kZstd: return "zstd";
  }
  return "?";
}

class ByteSource::Impl {
 public:
  Impl(int fd, std::filesystem::path path, bool close_when_done)
      : path_(std::move(path)), fd_(fd), close_fd_(close_when_done), input_(new char[kInputBlockBytes]) {
    // Enough stored bytes to tell the encoding (fewer only when the file is that short).
    while (input_end_ < sizeof kZstdMagic && !eof_) Fill();
    if (StartsWith(input_.get(), input_end_, kZstdMagic)) {
      encoding_ = ByteEncoding::kZstd;
      zstd_ = ZSTD_createDStream();
      if (zstd_ == nullptr) throw std::bad_alloc();
    } else if (StartsWith(input_.get(), input_end_, kGzipMagic)) {
      encoding_ = ByteEncoding::kGzip;
      gzip_ = std::make_unique<z_stream>();
      // 16 + MAX_WBITS: a gzip wrapper only (the magic said so), the largest window.
      if (inflateInit2(gzip_.get(), 16 + MAX_WBITS) != Z_OK) {
        gzip_.reset();
        throw std::bad_alloc();
      }
    }
  }

  ~Impl() {
    if (gzip_) inflateEnd(gzip_.get());
    if (zstd_ != nullptr) ZSTD_freeDStream(zstd_);
    if (close_fd_ && fd_ >= 0) ::close(fd_);
  }
  Impl(const Impl&) = delete;
  Impl& operator=(const Impl&) = delete;

  std::size_t Read(char* out, std::size_t capacity) {
    if (capacity == 0) return 0;
    started_ = true;
    const std::size_t produced = encoding_ == ByteEncoding::kPlain ? ReadPlain(out, capacity)
                                                                  : ReadDecoded(out, capacity);
    content_bytes_ += produced;
    return produced;
  }

  void SetObserver(std::function<void(std::string_view)> observer) {
    if (started_) {
      throw std::logic_error("ByteSource::SetStoredByteObserver after the first Read: stored bytes would be missed");
    }
    observer_ = std::move(observer);
    // Nothing has been consumed yet: the buffer holds every stored byte read so far.
    if (observer_ && input_end_ > 0) observer_(std::string_view(input_.get(), input_end_));
  }

  ByteEncoding encoding() const { return encoding_; }
  std::uint64_t stored_bytes() const { return stored_bytes_; }
  std::uint64_t content_bytes() const { return content_bytes_; }
  const std::filesystem::path& path() const { return path_; }

 private:
  // Reads the next block of stored bytes after the pending ones (moving those to the front);
  // sets eof_ when the file has no more.
  void Fill() {
    if (input_begin_ == input_end_) {
      input_begin_ = input_end_ = 0;
    } else if (input_begin_ > 0) {
      std::memmove(input_.get(), input_.get() + input_begin_, input_end_ - input_begin_);
      input_end_ -= input_begin_;
      input_begin_ = 0;
    }
    const std::size_t got = ReadStored(input_.get() + input_end_, kInputBlockBytes - input_end_);
    input_end_ += got;
  }

  // One read(2) of stored bytes into out, shown to the observer; 0 sets eof_.
  std::size_t ReadStored(char* out, std::size_t capacity) {
    ssize_t got;
    do {
      got = ::read(fd_, out, capacity);
    } while (got < 0 && errno == EINTR);
    if (got < 0) {
      throw InputError(path_.string() + ": cannot read at stored byte " + std::to_string(stored_bytes_) + ": " +
                       std::strerror(errno));
    }
    if (got == 0) {
      eof_ = true;
      return 0;
    }
    const auto size = static_cast<std::size_t>(got);
    stored_bytes_ += size;
    if (observer_) observer_(std::string_view(out, size));
    return size;
  }

  std::size_t ReadPlain(char* out, std::size_t capacity) {
    if (input_begin_ < input_end_) {  // the bytes read to tell the encoding
      const std::size_t size = std::min(capacity, input_end_ - input_begin_);
      std::memcpy(out, input_.get() + input_begin_, size);
      input_begin_ += size;
      return size;
    }
    // Straight into the caller's buffer: plain bytes need no copy.
    return eof_ ? 0 : ReadStored(out, capacity);
  }

  // Stored offset of the next byte the decoder will consume.
  std::uint64_t DecoderOffset() const { return stored_bytes_ - (input_end_ - input_begin_); }

  std::size_t ReadDecoded(char* out, std::size_t capacity) {
    for (;;) {
      if (input_begin_ == input_end_ && !eof_) Fill();
      const bool no_more_input = input_begin_ == input_end_ && eof_;
      if (no_more_input && !inside_member_) return 0;
      const std::size_t produced = encoding_ == ByteEncoding::kGzip ? InflateSome(out, capacity)
                                                                    : DecompressZstdSome(out, capacity);
      if (produced > 0) return produced;
      if (no_more_input) {
        // The decoder had every stored byte and still wants more: the file was cut short.
        throw InputError(path_.string() + ": truncated " + ToString(encoding_) +
                         " stream: the file ends at stored byte " + std::to_string(stored_bytes_) + " inside a " +
                         (encoding_ == ByteEncoding::kGzip ? "member" : "frame"));
      }
    }
  }

  [[noreturn]] void Corrupt(const std::string& why) const {
    throw InputError(path_.string() + ": corrupt " + ToString(encoding_) + " stream at stored byte " +
                     std::to_string(DecoderOffset()) + ": " + why);
  }

  std::size_t InflateSome(char* out, std::size_t capacity) {
    z_stream& stream = *gzip_;
    // zlib counts in uInt: feed at most that much at once.
    const auto available = static_cast<uInt>(std::min<std::size_t>(input_end_ - input_begin_, UINT32_MAX));
    stream.next_in = reinterpret_cast<Bytef*>(input_.get() + input_begin_);
    stream.avail_in = available;
    stream.next_out = reinterpret_cast<Bytef*>(out);
    stream.avail_out = static_cast<uInt>(std::min<std::size_t>(capacity, UINT32_MAX));
    const uInt out_before = stream.avail_out;
    // Any stored byte after a finished member starts the next one (a concatenation).
    if (available > 0) inside_member_ = true;
    const int status = inflate(&stream, Z_NO_FLUSH);
    input_begin_ += available - stream.avail_in;
    const std::size_t produced = out_before - stream.avail_out;
    switch (status) {
      case Z_OK:
      case Z_BUF_ERROR:  // no progress possible without more input: not an error by itself
        break;
      case Z_STREAM_END:
        inside_member_ = false;
        if (inflateReset(&stream) != Z_OK) Corrupt("cannot start the next member");
        break;
      case Z_NEED_DICT:
        Corrupt("the stream needs a preset dictionary");
      case Z_MEM_ERROR:
        throw std::bad_alloc();
      default:
        Corrupt(stream.msg != nullptr ? stream.msg : "inflate failed");
    }
    return produced;
  }

  std::size_t DecompressZstdSome(char* out, std::size_t capacity) {
    ZSTD_inBuffer in{input_.get() + input_begin_, input_end_ - input_begin_, 0};
    ZSTD_outBuffer output{out, capacity, 0};
    const std::size_t hint = ZSTD_decompressStream(zstd_, &output, &in);
    input_begin_ += in.pos;
    if (ZSTD_isError(hint)) Corrupt(ZSTD_getErrorName(hint));
    // 0: a frame is decoded and flushed; the next stored byte, if any, starts another frame.
    inside_member_ = hint != 0;
    return output.pos;
  }

  std::filesystem::path path_;
  int fd_ = -1;
  bool close_fd_ = false;
  std::unique_ptr<char[]> input_;  ///< stored bytes: [input_begin_, input_end_) not yet decoded
  std::size_t input_begin_ = 0;
  std::size_t input_end_ = 0;
  bool eof_ = false;
  bool started_ = false;        ///< Read() was called
  bool inside_member_ = false;  ///< a gzip member or zstd frame is begun and not finished
  std::uint64_t stored_bytes_ = 0;
  std::uint64_t content_bytes_ = 0;
  ByteEncoding encoding_ = ByteEncoding::kPlain;
  std::unique_ptr<z_stream> gzip_;
  ZSTD_DStream* zstd_ = nullptr;
  std::function<void(std::string_view)> observer_;
};

namespace {

int OpenForReading(const std::filesystem::path& path) {
  const int fd = ::open(path.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd < 0) throw InputError(path.string() + ": cannot open: " + std::strerror(errno));
  return fd;
}

}  // namespace

ByteSource::ByteSource(std::filesystem::path path) {
  const int fd = OpenForReading(path);
  try {
    impl_ = std::make_unique<Impl>(fd, std::move(path), true);
  } catch (...) {
    // Impl's destructor did not run: the descriptor is still open.
    ::close(fd);
    throw;
  }
}

ByteSource::ByteSource(int fd, std::filesystem::path name, bool close_when_done) {
  try {
    impl_ = std::make_unique<Impl>(fd, std::move(name), close_when_done);
  } catch (...) {
    if (close_when_done) ::close(fd);
    throw;
  }
}

ByteSource::~ByteSource() = default;
ByteSource::ByteSource(ByteSource&&) noexcept = default;
ByteSource& ByteSource::operator=(ByteSource&&) noexcept = default;

std::size_t ByteSource::Read(char* out, std::size_t capacity) { return impl_->Read(out, capacity); }
void ByteSource::SetStoredByteObserver(std::function<void(std::string_view)> observer) {
  impl_->SetObserver(std::move(observer));
}
ByteEncoding ByteSource::encoding_kind() const { return impl_->encoding(); }
std::uint64_t ByteSource::stored_bytes() const { return impl_->stored_bytes(); }
std::uint64_t ByteSource::content_bytes() const { return impl_->content_bytes(); }
const std::filesystem::path& ByteSource::path() const { return impl_->path(); }

}  // namespace stepledger
