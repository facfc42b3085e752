#include "stepledger/cli/printable_text.h"

#include <cstdio>

namespace stepledger {
namespace {

void AppendEscaped(std::string& out, unsigned char byte) {
  char escaped[5];
  std::snprintf(escaped, sizeof escaped, "\\x%02X", byte);
  out += escaped;
}

// The length of the well-formed UTF-8 sequence starting at text[0] (RFC 3629, table 3-7 of the
// Unicode standard), 0 when it is malformed, or -1 when text ends before the sequence could be
// judged (more bytes may complete it).
int SequenceLength(std::string_view text) {
  const auto lead = static_cast<unsigned char>(text[0]);
  if (lead < 0x80) return 1;
  int length = 0;
  unsigned char low = 0x80, high = 0xBF;  // range of the second byte
  if (lead >= 0xC2 && lead <= 0xDF) length = 2;
  else if (lead == 0xE0) length = 3, low = 0xA0;
  else if (lead >= 0xE1 && lead <= 0xEC) length = 3;
  else if (lead == 0xED) length = 3, high = 0x9F;  // no surrogates
  else if (lead >= 0xEE && lead <= 0xEF) length = 3;
  else if (lead == 0xF0) length = 4, low = 0x90;
  else if (lead >= 0xF1 && lead <= 0xF3) length = 4;
  else if (lead == 0xF4) length = 4, high = 0x8F;  // nothing above U+10FFFF
  else return 0;
  for (int k = 1; k < length; ++k) {
    if (static_cast<std::size_t>(k) >= text.size()) return -1;
    const auto byte = static_cast<unsigned char>(text[k]);
    if (k == 1 ? (byte < low || byte > high) : (byte & 0xC0) != 0x80) return 0;
  }
  return length;
}

// Escapes text into out; returns how many bytes at the end were left (an unfinished sequence)
// when final is false.
std::size_t EscapeInto(std::string& out, std::string_view text, bool final) {
  std::size_t i = 0;
  while (i < text.size()) {
    const auto byte = static_cast<unsigned char>(text[i]);
    if (byte < 0x80) {
      if ((byte < 0x20 && byte != '\n' && byte != '\t') || byte == 0x7F) AppendEscaped(out, byte);
      else out += static_cast<char>(byte);
      ++i;
      continue;
    }
    const int length = SequenceLength(text.substr(i));
    if (length < 0 && !final) return text.size() - i;
    if (length <= 0) {
      AppendEscaped(out, byte);
      ++i;
      continue;
    }
    out.append(text.substr(i, static_cast<std::size_t>(length)));
    i += static_cast<std::size_t>(length);
  }
  return 0;
}

}  // namespace

std::string PrintableText(std::string_view text) {
  std::string out;
  out.reserve(text.size());
  EscapeInto(out, text, true);
  return out;
}

class PrintableTextStream::Buffer : public std::streambuf {
 public:
  explicit Buffer(std::ostream& target) : target_(target) {}
  ~Buffer() override { Drain(true); }

 protected:
  int_type overflow(int_type c) override {
    if (c == traits_type::eof()) return traits_type::not_eof(c);
    pending_ += static_cast<char>(c);
    if (pending_.size() >= 4096) Drain(false);
    return c;
  }
  std::streamsize xsputn(const char* s, std::streamsize n) override {
    pending_.append(s, static_cast<std::size_t>(n));
    if (pending_.size() >= 4096) Drain(false);
    return n;
  }
  int sync() override {
    Drain(true);
    target_.flush();
    return target_ ? 0 : -1;
  }

 private:
  void Drain(bool final) {
    std::string escaped;
    const std::size_t left = EscapeInto(escaped, pending_, final);
    target_ << escaped;
    pending_.erase(0, pending_.size() - left);
  }
  std::ostream& target_;
  std::string pending_;
};

PrintableTextStream::PrintableTextStream(std::ostream& target)
    : std::ostream(nullptr), buffer_(std::make_unique<Buffer>(target)) {
  rdbuf(buffer_.get());
}

PrintableTextStream::~PrintableTextStream() { flush(); }

}  // namespace stepledger
