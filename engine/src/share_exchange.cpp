#include "stepledger/engine/share_exchange.h"

#include <new>

#include "stepledger/engine/errors.h"

namespace stepledger {
namespace {

// The leading byte of a part.
constexpr char kValue = 'V';
constexpr char kError = 'E';

// The kinds of error a part carries: the exit status a command gives depends on the kind.
enum class ErrorKind : std::uint64_t { kInput = 1, kLocated, kPlan, kNumerical, kResource, kMemory, kOther };

}  // namespace

std::vector<std::string> AllGather(ShareExchange& exchange, const std::string& part) {
  const int count = exchange.count();
  std::vector<std::string> parts(static_cast<std::size_t>(count));
  if (exchange.index() == 0) {
    parts[0] = part;
    for (int from = 1; from < count; ++from) parts[static_cast<std::size_t>(from)] = exchange.Receive(from);
    ByteWriter all;
    for (const std::string& each : parts) all.Text(each);
    for (int to = 1; to < count; ++to) exchange.Send(to, all.bytes());
    return parts;
  }
  exchange.Send(0, part);
  const std::string all = exchange.Receive(0);
  ByteReader in(all);
  for (std::string& each : parts) each = in.Text();
  return parts;
}

std::string EncodeValue(const std::string& value) {
  std::string part(1, kValue);
  part += value;
  return part;
}

std::string EncodeError(const std::exception_ptr& error) {
  ByteWriter out;
  out.Raw(&kError, 1);
  try {
    std::rethrow_exception(error);
  } catch (const LocatedInputError& located) {
    out.U64(static_cast<std::uint64_t>(ErrorKind::kLocated));
    out.Text(located.file());
    out.U64(located.line());
    out.U64(located.column());
    out.Text(located.detail());
  } catch (const PlanError& plan) {
    out.U64(static_cast<std::uint64_t>(ErrorKind::kPlan));
    out.Text(plan.key_path());
    out.Text(plan.what());
  } catch (const InputError& input) {
    out.U64(static_cast<std::uint64_t>(ErrorKind::kInput));
    out.Text(input.what());
  } catch (const NumericalError& numerical) {
    out.U64(static_cast<std::uint64_t>(ErrorKind::kNumerical));
    out.Text(numerical.what());
  } catch (const ResourceError& resource) {
    out.U64(static_cast<std::uint64_t>(ErrorKind::kResource));
    out.Text(resource.what());
  } catch (const std::bad_alloc&) {
    out.U64(static_cast<std::uint64_t>(ErrorKind::kMemory));
    out.Text("out of memory");
  } catch (const std::exception& other) {
    out.U64(static_cast<std::uint64_t>(ErrorKind::kOther));
    out.Text(other.what());
  } catch (...) {
    out.U64(static_cast<std::uint64_t>(ErrorKind::kOther));
    out.Text("an unknown exception");
  }
  return out.Take();
}

bool HoldsError(std::string_view part) { return !part.empty() && part.front() == kError; }

std::string_view ValueOf(std::string_view part) {
  if (part.empty() || part.front() != kValue) throw std::logic_error("ValueOf: the part holds no value (a bug)");
  return part.substr(1);
}

void RethrowPart(std::string_view part) {
  ByteReader in(part.substr(1));
  const auto kind = static_cast<ErrorKind>(in.U64());
  switch (kind) {
    case ErrorKind::kLocated: {
      std::string file = in.Text();
      const std::uint64_t line = in.U64();
      const std::uint64_t column = in.U64();
      throw LocatedInputError(std::move(file), line, column, in.Text());
    }
    case ErrorKind::kPlan: {
      in.Text();  // the key path: the message already names it, and PlanError would prefix it again
      throw InputError(in.Text());
    }
    case ErrorKind::kInput:
      throw InputError(in.Text());
    case ErrorKind::kNumerical:
      throw NumericalError(in.Text());
    case ErrorKind::kResource:
      throw ResourceError(in.Text());
    case ErrorKind::kMemory:
      throw std::bad_alloc();
    default:
      throw std::runtime_error(in.Text());
  }
}

void RethrowFirstError(const std::vector<std::string>& parts) {
  for (const std::string& part : parts) {
    if (HoldsError(part)) RethrowPart(part);
  }
}

void WriteFactor(ByteWriter& out, const Factor& factor) {
  out.U64(factor.r.n_rows);
  out.U64(factor.r.n_cols);
  out.Raw(factor.r.memptr(), factor.r.n_elem * sizeof(double));
  out.U64(factor.scales.size());
  for (double scale : factor.scales) out.F64(scale);
  out.U64(factor.rows);
  out.F64(factor.weight_sum);
  out.F64(factor.log_weight_sum);
  out.U64(factor.column_stats.size());
  for (const RunningStats& stats : factor.column_stats) {
    out.U64(stats.count);
    out.F64(stats.min);
    out.F64(stats.max);
    out.F64(stats.mean);
    out.F64(stats.m2);
  }
}

Factor ReadFactor(ByteReader& in) {
  Factor factor;
  const std::uint64_t rows = in.U64();
  const std::uint64_t columns = in.U64();
  factor.r.set_size(rows, columns);
  in.Raw(factor.r.memptr(), factor.r.n_elem * sizeof(double));
  factor.scales.resize(in.U64());
  for (double& scale : factor.scales) scale = in.F64();
  factor.rows = in.U64();
  factor.weight_sum = in.F64();
  factor.log_weight_sum = in.F64();
  factor.column_stats.resize(in.U64());
  for (RunningStats& stats : factor.column_stats) {
    stats.count = in.U64();
    stats.min = in.F64();
    stats.max = in.F64();
    stats.mean = in.F64();
    stats.m2 = in.F64();
  }
  return factor;
}

}  // namespace stepledger
