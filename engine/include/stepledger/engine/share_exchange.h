#pragma once
// Several processes reading one data set, each its share (a cluster run: `mpirun -np K
// stepledger select ...`). The engine knows only this small interface: messages of bytes
// between numbered processes. The cluster library (cluster/, built with Open MPI) implements it;
// nothing in the engine, selection or run layers sees MPI.
//
// Every exchange below is collective: each process calls it at the same point with its own
// part. A process that fails sends its error in place of its part (EncodeError), so that every
// process learns the same error at the same point and none waits forever.

#include <cstdint>
#include <cstring>
#include <exception>
#include <stdexcept>
#include <string>
#include <string_view>
#include <vector>

#include "stepledger/engine/factor.h"

namespace stepledger {

class ShareExchange {
 public:
  virtual ~ShareExchange() = default;
  /// This process's number, 0 to count() - 1; process 0 drives the run and writes every output.
  virtual int index() const = 0;
  /// Processes taking part (>= 1).
  virtual int count() const = 0;
  /// Sends bytes to process `to` (blocks until they are taken or buffered).
  virtual void Send(int to, const std::string& bytes) = 0;
  /// Receives the next message from process `from`.
  virtual std::string Receive(int from) = 0;
};

/// Every process's part, in process order, on every process (collected on process 0, then sent
/// to the others: 2 (K - 1) messages).
std::vector<std::string> AllGather(ShareExchange& exchange, const std::string& part);

/// Little-endian writer of the values the processes exchange (u64 lengths, doubles by their bits).
class ByteWriter {
 public:
  void U64(std::uint64_t value) { Raw(&value, sizeof value); }
  void F64(double value) { Raw(&value, sizeof value); }
  void Text(std::string_view text) {
    U64(text.size());
    bytes_.append(text.data(), text.size());
  }
  void Raw(const void* data, std::size_t size) { bytes_.append(static_cast<const char*>(data), size); }
  const std::string& bytes() const { return bytes_; }
  std::string Take() { return std::move(bytes_); }

 private:
  std::string bytes_;
};

/// Reads what ByteWriter wrote; a read past the end is a bug (std::logic_error).
class ByteReader {
 public:
  explicit ByteReader(std::string_view bytes) : bytes_(bytes) {}
  std::uint64_t U64() {
    std::uint64_t value;
    Raw(&value, sizeof value);
    return value;
  }
  double F64() {
    double value;
    Raw(&value, sizeof value);
    return value;
  }
  std::string Text() {
    const std::uint64_t size = U64();
    Need(size);
    std::string text(bytes_.substr(at_, size));
    at_ += size;
    return text;
  }
  void Raw(void* data, std::size_t size) {
    Need(size);
    std::memcpy(data, bytes_.data() + at_, size);
    at_ += size;
  }
  bool done() const { return at_ == bytes_.size(); }

 private:
  void Need(std::uint64_t size) const {
    if (size > bytes_.size() - at_) throw std::logic_error("ByteReader: message shorter than its contents (a bug)");
  }
  std::string_view bytes_;
  std::size_t at_ = 0;
};

/// A part that is either a value or an error: a leading byte says which.
std::string EncodeValue(const std::string& value);
std::string EncodeError(const std::exception_ptr& error);
/// True when the part holds an error.
bool HoldsError(std::string_view part);
/// The value of a part (must not hold an error).
std::string_view ValueOf(std::string_view part);
/// Throws the part's error again as the same kind (InputError, LocatedInputError, PlanError,
/// LimitError as InputError, NumericalError, ResourceError; anything else as std::runtime_error).
[[noreturn]] void RethrowPart(std::string_view part);
/// Throws the error of the lowest-numbered process that sent one (the first in reading order),
/// if any.
void RethrowFirstError(const std::vector<std::string>& parts);

/// A factor as bytes and back (every number by its bits: the round trip is exact).
void WriteFactor(ByteWriter& out, const Factor& factor);
Factor ReadFactor(ByteReader& in);

}  // namespace stepledger
