#include "stepledger/engine/csv.h"

#include <fcntl.h>
#include <unistd.h>

#include <algorithm>
#include <cerrno>
#include <charconv>
#include <cmath>
#include <cstdlib>
#include <cstring>
#include <memory>
#include <stdexcept>
#include <system_error>
#include <unordered_map>

#include "stepledger/engine/byte_source.h"
#include "stepledger/engine/errors.h"
#include "stepledger/engine/number_format.h"
#include "stepledger/engine/utf8.h"

namespace stepledger {
namespace {

constexpr char kQuote = '"';
constexpr std::string_view kByteOrderMark = "\xEF\xBB\xBF";

const char* FindByte(const char* begin, const char* end, char byte) {
  return static_cast<const char*>(std::memchr(begin, byte, static_cast<std::size_t>(end - begin)));
}

// Where the unquoted text from begin ends: at the next delimiter or LF, or at end.
const char* FieldStop(const char* begin, const char* end, char delimiter) {
  const char* stop = begin;
  while (stop < end && *stop != delimiter && *stop != '\n') ++stop;
  return stop;
}

// The unquoted field that contains position: from begin to the next delimiter or LF.
std::string_view FieldAround(const char* begin, const char* end, char delimiter) {
  const char* stop = FieldStop(begin, end, delimiter);
  if (stop > begin && stop[-1] == '\r') --stop;
  return {begin, static_cast<std::size_t>(stop - begin)};
}

constexpr const char* kBareCarriageReturnInHeader =
    "the header holds a carriage return that is not followed by a line feed: lines must end in "
    "LF or CR LF (a file whose lines end in CR alone needs converting first)";

std::string CountText(std::uint64_t count) {
  return count > INT64_MAX ? std::to_string(count) : FormatCount(static_cast<std::int64_t>(count));
}

std::string Quoted(std::string_view text) {
  // Appended piece by piece: GCC 12 at -O3 warns (-Wrestrict, a false positive) on "'" + str.
  std::string quoted = "'";
  quoted += QuoteForMessage(text);
  quoted += '\'';
  return quoted;
}

// The steps of CsvReader::TryParseQuoted, the reader's hot path for records holding a quote.
// Each works on pointers into the buffer and the caller's locals (no allocation, no copy) and
// is small enough to be inlined; errors stay with the caller, which owns the message context.

// How a scan of one field ended: its end was found, the buffer ends before it does and more
// input may follow, or the text breaks the quoting rules at the position returned.
enum class FieldScan { kFound, kNeedMoreInput, kBroken };

// The line count of a record as it is parsed: the line the scan is on and the file offset at
// which that line starts. Committed to the reader only when the whole record is parsed.
struct LinePosition {
  std::uint64_t line;
  std::uint64_t line_start;
};

// Scans a quoted field's content, from just after its opening quote to its closing quote,
// stepping over doubled quotes and counting the line ends inside. kFound sets closing_quote;
// kBroken means the quote is never closed (the file ends first).
inline FieldScan ScanQuotedContent(const char* content_begin, const char* end, bool at_eof,
                                   const char* base, std::uint64_t buffer_offset, LinePosition& lines,
                                   const char*& closing_quote, bool& has_doubled_quotes) {
  const char* scan = content_begin;
  for (;;) {
    const char* quote = FindByte(scan, end, kQuote);
    const char* segment_end = quote != nullptr ? quote : end;
    for (const char* lf = FindByte(scan, segment_end, '\n'); lf != nullptr;
         lf = FindByte(lf + 1, segment_end, '\n')) {
      ++lines.line;
      lines.line_start = buffer_offset + static_cast<std::uint64_t>(lf + 1 - base);
    }
    if (quote == nullptr) return at_eof ? FieldScan::kBroken : FieldScan::kNeedMoreInput;
    // A quote at the buffer's end may be the first of a doubled pair: wait for the next byte.
    if (quote + 1 == end && !at_eof) return FieldScan::kNeedMoreInput;
    if (quote + 1 < end && quote[1] == kQuote) {
      has_doubled_quotes = true;
      scan = quote + 2;
      continue;
    }
    closing_quote = quote;
    return FieldScan::kFound;
  }
}

// After the closing quote only a delimiter, a line end or the end of the file may follow.
// kFound sets after_field to the delimiter, the LF or end; kBroken means stray text at position.
inline FieldScan FindEndAfterClosingQuote(const char* position, const char* end, char delimiter,
                                          bool at_eof, const char*& after_field) {
  if (position == end) {
    if (!at_eof) return FieldScan::kNeedMoreInput;
    after_field = end;
  } else if (*position == delimiter || *position == '\n') {
    after_field = position;
  } else if (*position == '\r' && (position + 1 == end || position[1] == '\n')) {
    if (position + 1 == end && !at_eof) return FieldScan::kNeedMoreInput;
    after_field = position + 1;
  } else {
    return FieldScan::kBroken;
  }
  return FieldScan::kFound;
}

// Appends a quoted field's content to storage with each doubled quote made single. Every quote
// inside the content is doubled (ScanQuotedContent checked it): keep the first of each pair.
inline void AppendUndoubled(std::string_view content, std::string& storage) {
  for (std::string_view rest = content; !rest.empty();) {
    const std::size_t quote = rest.find(kQuote);
    if (quote == std::string_view::npos) {
      storage.append(rest);
      break;
    }
    storage.append(rest.substr(0, quote + 1));
    rest.remove_prefix(quote + 2);
  }
}

// Scans an unquoted field from position to the delimiter, LF or end that closes it (after_field)
// and sets text to its content without a CR before a line end. kBroken: a quote at after_field.
inline FieldScan ScanUnquotedField(const char* position, const char* end, char delimiter, bool at_eof,
                                   const char*& after_field, std::string_view& text) {
  const char* scan = position;
  while (scan < end && *scan != delimiter && *scan != '\n' && *scan != kQuote) ++scan;
  if (scan < end && *scan == kQuote) {
    after_field = scan;
    return FieldScan::kBroken;
  }
  if (scan == end && !at_eof) return FieldScan::kNeedMoreInput;
  const char* text_end = scan;
  if (scan == end || *scan == '\n') {
    if (text_end > position && text_end[-1] == '\r') --text_end;
  }
  text = std::string_view(position, static_cast<std::size_t>(text_end - position));
  after_field = scan;
  return FieldScan::kFound;
}

}  // namespace

void CsvOptions::Validate() const {
  if (delimiter == kQuote || delimiter == '\r' || delimiter == '\n') {
    throw InputError("CSV option 'delimiter' is '" + QuoteForMessage(std::string_view(&delimiter, 1)) +
                     "'; it must be one byte other than a double quote, CR or LF");
  }
  if (block_bytes == 0) {
    throw InputError("CSV option 'block_bytes' is 0; it must be at least 1");
  }
  if (max_columns == 0) {
    throw InputError("CSV option 'max_columns' is 0; it must be at least 1");
  }
}

CellKind ClassifyCell(std::string_view text, const std::vector<std::string>& missing_tokens,
                      double& value) {
  for (const std::string& token : missing_tokens) {
    if (text == token) return CellKind::kMissing;
  }
  std::string_view digits = text;
  // from_chars rejects a leading '+'; accept exactly one, but not "+-1" or a lone "+".
  if (!digits.empty() && digits.front() == '+') {
    digits.remove_prefix(1);
    if (digits.empty() || digits.front() == '+' || digits.front() == '-') return CellKind::kText;
  }
  if (digits.empty()) return CellKind::kText;
  const char* first = digits.data();
  const char* last = first + digits.size();
  double parsed = 0;
  const auto [end, error] = std::from_chars(first, last, parsed, std::chars_format::general);
  if (end != last) return CellKind::kText;
  if (error == std::errc::result_out_of_range) {
    // from_chars leaves the value unset on overflow and underflow; strtod on the same
    // (already validated) text gives +-HUGE_VAL for overflow and 0 or a subnormal otherwise.
    const std::string copy(digits);
    parsed = std::strtod(copy.c_str(), nullptr);
  } else if (error != std::errc()) {
    return CellKind::kText;
  }
  value = parsed;
  return std::isfinite(parsed) ? CellKind::kNumber : CellKind::kNonFinite;
}

CsvReader::FileHandle& CsvReader::FileHandle::operator=(FileHandle&& other) noexcept {
  if (this != &other) {
    if (fd_ >= 0) ::close(fd_);
    fd_ = other.fd_;
    other.fd_ = -1;
  }
  return *this;
}

CsvReader::FileHandle::~FileHandle() {
  if (fd_ >= 0) ::close(fd_);
}

CsvReader::CsvReader(std::filesystem::path path, CsvOptions options)
    : path_(std::move(path)), display_name_(path_.string()), options_(std::move(options)) {
  options_.Validate();
  const int fd = ::open(path_.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd < 0) {
    throw InputError("cannot open data file '" + display_name_ + "': " + std::strerror(errno));
  }
  file_ = FileHandle(fd);
  // Through a ByteSource, so that a gzip or zstd file reads as its text.
  auto source = std::make_shared<ByteSource>(fd, path_);
  read_ = [source](char* buffer, std::size_t capacity) { return source->Read(buffer, capacity); };
  ReadHeader();
}

CsvReader::CsvReader(std::filesystem::path path, ReadFunction read, CsvOptions options)
    : path_(std::move(path)), display_name_(path_.string()), options_(std::move(options)),
      read_(std::move(read)) {
  options_.Validate();
  ReadHeader();
}

CsvReader::CsvReader(std::filesystem::path path, int fd, CsvRange range, CsvOptions options)
    : path_(std::move(path)), display_name_(path_.string()), options_(std::move(options)),
      header_(std::move(range.header)) {
  options_.Validate();
  range_end_ = range.end;
  buffer_offset_ = range.begin;
  line_start_offset_ = range.begin;
  bytes_read_ = range.begin;
  read_ = [fd, next = range.begin, name = display_name_](char* buffer, std::size_t capacity) mutable {
    for (;;) {
      const ssize_t got = ::pread(fd, buffer, capacity, static_cast<off_t>(next));
      if (got >= 0) {
        next += static_cast<std::uint64_t>(got);
        return static_cast<std::size_t>(got);
      }
      if (errno != EINTR) {
        throw InputError("cannot read data file '" + name + "': " + std::strerror(errno));
      }
    }
  };
}

void CsvReader::ReadMore() {
  if (eof_) return;
  // Keep only the unconsumed bytes; views of the previous record die here (allowed: they
  // are valid until the next Next()).
  if (cursor_ > 0) {
    buffer_.erase(0, cursor_);
    buffer_offset_ += cursor_;
    cursor_ = 0;
  }
  const std::size_t pending = buffer_.size();
  const std::size_t wanted = std::max(options_.block_bytes, pending);
  std::size_t appended = 0;
  while (appended < wanted) {
    const std::size_t old_size = buffer_.size();
    buffer_.resize(old_size + options_.block_bytes);
    std::size_t got = 0;
    try {
      got = read_(buffer_.data() + old_size, options_.block_bytes);
    } catch (...) {
      buffer_.resize(old_size);
      throw;
    }
    buffer_.resize(old_size + got);
    if (got == 0) {
      eof_ = true;
      break;
    }
    const std::string_view block(buffer_.data() + old_size, static_cast<std::size_t>(got));
    if (observer_) {
      observer_(block);
    } else if (!next_called_) {
      header_bytes_.append(block);
    }
    appended += static_cast<std::size_t>(got);
  }
}

std::uint64_t CsvReader::ColumnAt(const char* position, std::uint64_t line_start) const {
  return buffer_offset_ + static_cast<std::uint64_t>(position - buffer_.data()) - line_start + 1;
}

void CsvReader::Fail(std::uint64_t line, std::uint64_t column, const std::string& what) const {
  throw LocatedInputError(display_name_, line, column, what);
}

bool CsvReader::TryParseRecord(std::vector<CsvField>& fields, std::uint64_t& start_line) {
  const char* const base = buffer_.data();
  const char* const record_begin = base + cursor_;
  const char* const end = base + buffer_.size();
  const char* const newline = FindByte(record_begin, end, '\n');
  if (newline == nullptr && !eof_) return false;
  const char* const line_end = newline != nullptr ? newline : end;
  if (FindByte(record_begin, line_end, kQuote) != nullptr) {
    return TryParseQuoted(fields, start_line);
  }

  // Common case: a line without quotes. Split it at delimiters; texts are views of buffer_.
  const char* text_end = line_end;
  if (text_end > record_begin && text_end[-1] == '\r') --text_end;
  fields.clear();
  stored_texts_.clear();
  const std::uint64_t first_column = ColumnAt(record_begin, line_start_offset_);
  const char delimiter = options_.delimiter;
  const char* field_begin = record_begin;
  for (;;) {
    const char* field_end = FindByte(field_begin, text_end, delimiter);
    const char* stop = field_end != nullptr ? field_end : text_end;
    CsvField& field = fields.emplace_back();
    field.text = std::string_view(field_begin, static_cast<std::size_t>(stop - field_begin));
    field.line = line_;
    field.column = first_column + static_cast<std::uint64_t>(field_begin - record_begin);
    field.quoted = false;
    if (field_end == nullptr) break;
    field_begin = field_end + 1;
  }
  start_line = line_;
  if (newline != nullptr) {
    ++line_;
    cursor_ = static_cast<std::size_t>(newline + 1 - base);
    line_start_offset_ = buffer_offset_ + cursor_;
  } else {
    cursor_ = buffer_.size();
  }
  return true;
}

// General case: the record holds a quote somewhere. A field-by-field scan over local copies of
// the position state, committed only when the whole record is in the buffer; false asks for more.
bool CsvReader::TryParseQuoted(std::vector<CsvField>& fields, std::uint64_t& start_line) {
  const char* const base = buffer_.data();
  const char* const end = base + buffer_.size();
  const char delimiter = options_.delimiter;
  fields.clear();
  stored_texts_.clear();
  record_storage_.clear();
  LinePosition lines{line_, line_start_offset_};
  const char* position = base + cursor_;

  for (;;) {  // one field per iteration
    CsvField& field = fields.emplace_back();
    field.line = lines.line;
    field.column = ColumnAt(position, lines.line_start);
    field.quoted = false;
    const char* after_field = nullptr;  // the delimiter, LF or end that closes the field

    if (position < end && *position == kQuote) {
      field.quoted = true;
      const char* const opening = position;
      const char* const content_begin = position + 1;
      const char* closing_quote = nullptr;
      bool has_doubled_quotes = false;
      switch (ScanQuotedContent(content_begin, end, eof_, base, buffer_offset_, lines, closing_quote,
                                has_doubled_quotes)) {
        case FieldScan::kFound: break;
        case FieldScan::kNeedMoreInput: return false;
        case FieldScan::kBroken:
          Fail(field.line, field.column,
               "quoted field opened here is never closed (it starts " +
                   Quoted(std::string_view(opening, static_cast<std::size_t>(end - opening))) + ")");
      }
      position = closing_quote + 1;
      switch (FindEndAfterClosingQuote(position, end, delimiter, eof_, after_field)) {
        case FieldScan::kFound: break;
        case FieldScan::kNeedMoreInput: return false;
        case FieldScan::kBroken:
          // The message quotes the field to its end: read on until that end is in the buffer,
          // so that the message does not depend on where a block happened to end.
          if (FieldStop(position, end, delimiter) == end && !eof_) return false;
          Fail(lines.line, ColumnAt(position, lines.line_start),
               "unexpected text after the closing quote of field " +
                   Quoted(std::string_view(opening, static_cast<std::size_t>(
                                                        FieldAround(position, end, delimiter).end() -
                                                        opening))) +
                   "; a quoted field ends at its closing quote");
      }
      const std::string_view raw(content_begin, static_cast<std::size_t>(closing_quote - content_begin));
      if (has_doubled_quotes) {
        // Stored as an offset: record_storage_ may move while later fields are appended.
        const std::size_t offset = record_storage_.size();
        AppendUndoubled(raw, record_storage_);
        stored_texts_.push_back({fields.size() - 1, offset, record_storage_.size() - offset});
      } else {
        field.text = raw;
      }
    } else {
      switch (ScanUnquotedField(position, end, delimiter, eof_, after_field, field.text)) {
        case FieldScan::kFound: break;
        case FieldScan::kNeedMoreInput: return false;
        case FieldScan::kBroken:
          if (FieldStop(position, end, delimiter) == end && !eof_) return false;  // as above
          Fail(lines.line, ColumnAt(after_field, lines.line_start),
               "quote character inside unquoted field " + Quoted(FieldAround(position, end, delimiter)) +
                   "; quote the whole field and double each quote inside it");
      }
    }

    if (after_field < end && *after_field == delimiter) {
      position = after_field + 1;
      continue;
    }
    // End of the record: at a LF or at the end of the file.
    start_line = line_;
    if (after_field < end) {  // *after_field == '\n'
      ++lines.line;
      cursor_ = static_cast<std::size_t>(after_field + 1 - base);
      lines.line_start = buffer_offset_ + cursor_;
    } else {
      cursor_ = buffer_.size();
    }
    line_ = lines.line;
    line_start_offset_ = lines.line_start;
    for (const StoredText& stored : stored_texts_) {
      fields[stored.field_index].text =
          std::string_view(record_storage_.data() + stored.offset, stored.length);
    }
    return true;
  }
}

bool CsvReader::ReadRecord(std::vector<CsvField>& fields, std::uint64_t& start_line) {
  for (;;) {
    if (cursor_ == buffer_.size()) {
      if (eof_) return false;
      ReadMore();
      continue;
    }
    if (TryParseRecord(fields, start_line)) return true;
    ReadMore();
  }
}

bool CsvReader::OnlyLineBreaksRemain() {
  std::size_t checked = 0;  // bytes after cursor_ known to be CR or LF
  for (;;) {
    while (cursor_ + checked < buffer_.size()) {
      const char byte = buffer_[cursor_ + checked];
      if (byte != '\n' && byte != '\r') return false;
      ++checked;
    }
    if (eof_) return true;
    ReadMore();  // keeps the bytes from cursor_ on, so checked stays valid
  }
}

void CsvReader::ReadHeader() {
  // A BOM needs three bytes to be recognised, whatever the block size.
  while (buffer_.size() < kByteOrderMark.size() && !eof_) ReadMore();
  if (std::string_view(buffer_).substr(0, kByteOrderMark.size()) == kByteOrderMark) {
    cursor_ = kByteOrderMark.size();
    line_start_offset_ = kByteOrderMark.size();  // columns count from after the BOM
  }
  CheckHeaderWidth();
  std::vector<CsvField> fields;
  std::uint64_t start_line = 0;
  if (!ReadRecord(fields, start_line)) {
    Fail(1, 1, "the file is empty; expected a header row of column names");
  }
  if (fields.size() == 1 && !fields[0].quoted && fields[0].text.empty()) {
    Fail(1, 1, "the header line is empty; expected a row of column names");
  }
  // Lines ended by a carriage return alone make the whole file one line, whose fields would be
  // reported later as duplicate or missing columns: say what is wrong instead.
  for (const CsvField& field : fields) {
    const std::size_t carriage_return = field.quoted ? std::string_view::npos : field.text.find('\r');
    if (carriage_return != std::string_view::npos) {
      Fail(field.line, field.column + carriage_return, kBareCarriageReturnInHeader);
    }
  }
  header_.reserve(fields.size());
  // Names seen so far (views of the fields, valid until the next read): O(1) per name, so that a
  // header as wide as the limit allows costs no quadratic time.
  std::unordered_map<std::string_view, std::size_t> seen;
  seen.reserve(fields.size());
  for (std::size_t index = 0; index < fields.size(); ++index) {
    const CsvField& field = fields[index];
    if (field.text.empty()) {
      Fail(field.line, field.column,
           "header field " + std::to_string(index + 1) + " has an empty name; every column needs one");
    }
    if (FirstInvalidUtf8(field.text)) {
      // Column names go into every JSON the tool writes, which holds Unicode text only.
      Fail(field.line, field.column,
           "the name in header field " + std::to_string(index + 1) + " is not UTF-8 text (" +
               DescribeInvalidUtf8(field.text) +
               " of the name); stepledger reads data files as UTF-8: convert the file first (for example from "
               "Latin-1)");
    }
    if (const auto nul = FirstNulByte(field.text)) {
      Fail(field.line, field.column,
           "the name in header field " + std::to_string(index + 1) + " holds a NUL byte (0x00) at byte " +
               std::to_string(*nul + 1) + " of the name" + std::string(kNulByteAdvice));
    }
    const auto [earlier, inserted] = seen.emplace(field.text, index);
    if (!inserted) {
      Fail(field.line, field.column,
           "duplicate column name " + Quoted(field.text) + " in header fields " +
               std::to_string(earlier->second + 1) + " and " + std::to_string(index + 1) +
               " (first at column " + std::to_string(fields[earlier->second].column) + ")");
    }
    header_.emplace_back(field.text);
  }
  bytes_read_ = buffer_offset_ + cursor_;
}

void CsvReader::CheckHeaderWidth() {
  // A field starts after every delimiter outside quotes; a quote opens a quoted field only at a
  // field's start. A CR alone outside quotes is refused here (the file's lines end in CR: the
  // header would be the whole file); other irregular text is left to the parse that follows,
  // which names it. This count only stops a header that is too wide before it is held whole.
  enum class State { kFieldStart, kUnquoted, kQuoted, kQuoteInQuoted };
  State state = State::kFieldStart;
  std::uint64_t fields = 1;
  std::uint64_t line = line_;
  std::uint64_t line_start = line_start_offset_;
  std::size_t scanned = 0;  // bytes after cursor_ looked at (ReadMore keeps them)
  for (;;) {
    for (; cursor_ + scanned < buffer_.size(); ++scanned) {
      const char byte = buffer_[cursor_ + scanned];
      const std::uint64_t offset = buffer_offset_ + cursor_ + scanned;  // in the file
      if (byte == '\r' && (state == State::kFieldStart || state == State::kUnquoted)) {
        const std::size_t next = cursor_ + scanned + 1;
        if (next == buffer_.size() && !eof_) break;  // look at the next byte once it is read
        if (next < buffer_.size() && buffer_[next] != '\n') {
          Fail(line, offset - line_start + 1, kBareCarriageReturnInHeader);
        }
        state = State::kUnquoted;
        continue;
      }
      if (state == State::kQuoted) {
        if (byte == kQuote) state = State::kQuoteInQuoted;
        if (byte == '\n') {
          ++line;
          line_start = offset + 1;
        }
        continue;
      }
      if (byte == kQuote) {
        state = state == State::kFieldStart || state == State::kQuoteInQuoted ? State::kQuoted : State::kUnquoted;
      } else if (byte == '\n') {
        return;  // the header's end
      } else if (byte == options_.delimiter) {
        state = State::kFieldStart;
        if (++fields > options_.max_columns) {
          const std::uint64_t column = offset + 1 - line_start + 1;
          throw LimitError(LimitKind::kColumns, options_.max_columns, FormatLocation(display_name_, line, column),
                           "the header has more than " + CountText(options_.max_columns) + " columns (field " +
                               CountText(fields) + " starts here)");
        }
      } else {
        state = State::kUnquoted;
      }
    }
    if (eof_) return;
    ReadMore();
  }
}

std::ptrdiff_t HeaderIndex(const std::vector<std::string>& header, std::string_view name) {
  const auto found = std::find(header.begin(), header.end(), name);
  return found == header.end() ? -1 : found - header.begin();
}

std::ptrdiff_t CsvReader::ColumnIndex(std::string_view name) const { return HeaderIndex(header_, name); }

void CsvReader::SetByteObserver(std::function<void(std::string_view)> observer) {
  if (next_called_) {
    throw std::logic_error("CsvReader::SetByteObserver called after Next(); bytes would be missed");
  }
  observer_ = std::move(observer);
  if (observer_ && !header_bytes_.empty()) observer_(header_bytes_);
  header_bytes_.clear();
  header_bytes_.shrink_to_fit();
}

bool CsvReader::Next(CsvRecord& record) {
  if (!next_called_) {
    next_called_ = true;
    header_bytes_.clear();
    header_bytes_.shrink_to_fit();
  }
  std::uint64_t start_line = 0;
  // Absolute, because reading more bytes moves the unconsumed part to the buffer's front.
  const std::uint64_t record_offset = buffer_offset_ + cursor_;
  if (record_offset >= range_end_) {  // the next range's first record
    bytes_read_ = record_offset;
    return false;
  }
  if (!ReadRecord(record.fields, start_line)) {
    bytes_read_ = buffer_offset_ + cursor_;
    return false;
  }
  const bool empty_line =
      record.fields.size() == 1 && !record.fields[0].quoted && record.fields[0].text.empty();
  if (empty_line) {
    record.fields[0].text = std::string_view();  // OnlyLineBreaksRemain may move the buffer
    if (OnlyLineBreaksRemain()) {
      cursor_ = buffer_.size();
      bytes_read_ = buffer_offset_ + cursor_;
      return false;
    }
  }
  bytes_read_ = buffer_offset_ + cursor_;
  const std::size_t expected = header_.size();
  if (record.fields.size() != expected) {
    if (empty_line) {
      Fail(start_line, 1,
           "expected " + std::to_string(expected) + " fields as in the header, found an empty line");
    }
    const std::string counts = "expected " + std::to_string(expected) +
                               " fields as in the header, found " +
                               std::to_string(record.fields.size());
    if (record.fields.size() > expected) {
      const CsvField& extra = record.fields[expected];
      Fail(extra.line, extra.column, counts + "; the first extra field is " + Quoted(extra.text));
    }
    // The record's raw bytes, without its line end, for the message.
    const std::size_t record_begin = static_cast<std::size_t>(record_offset - buffer_offset_);
    std::string_view raw(buffer_.data() + record_begin, cursor_ - record_begin);
    while (!raw.empty() && (raw.back() == '\n' || raw.back() == '\r')) raw.remove_suffix(1);
    Fail(start_line, record.fields.front().column, counts + " in the record " + Quoted(raw));
  }
  record.line = start_line;
  record.offset = record_offset;
  record.row_index = next_row_index_++;
  return true;
}

std::string CsvReader::Where(const CsvField& field) const {
  return FormatLocation(display_name_, field.line, field.column);
}

}  // namespace stepledger

namespace stepledger {

std::optional<std::string> SeparatorHint(std::size_t column_count, std::string_view first_name) {
  if (column_count != 1) return std::nullopt;
  for (const char separator : {'\t', ';', '|'}) {
    if (first_name.find(separator) == std::string_view::npos) continue;
    const bool tab = separator == '\t';
    return "the header was read as a single column '" + QuoteForMessage(first_name) +
           "'; if the fields are separated by " + (tab ? std::string("tabs") : "'" + std::string(1, separator) + "'") +
           ", add " + (tab ? std::string("--delimiter tab") : "--delimiter '" + std::string(1, separator) + "'");
  }
  return std::nullopt;
}

}  // namespace stepledger
