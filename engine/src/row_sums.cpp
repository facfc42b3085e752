#include "stepledger/engine/row_sums.h"

#include <stdexcept>
#include <utility>

#include "double_double.h"
#include "refine.h"
#include "stepledger/engine/share_exchange.h"

namespace stepledger {

void RowSums::Add(const RowSums& other) {
  if (other.hi.size() != hi.size() || other.lo.size() != lo.size()) {
    throw std::logic_error("RowSums::Add: parts with different numbers of sums (a bug)");
  }
  rows += other.rows;
  for (std::size_t i = 0; i < hi.size(); ++i) {
    const dd::DoubleDouble total = dd::DoubleDouble{hi[i], lo[i]} + dd::DoubleDouble{other.hi[i], other.lo[i]};
    hi[i] = total.hi;
    lo[i] = total.lo;
  }
}

std::string RowSums::Write() const {
  ByteWriter out;
  out.U64(rows);
  out.U64(hi.size());
  for (std::size_t i = 0; i < hi.size(); ++i) {
    out.F64(hi[i]);
    out.F64(lo[i]);
  }
  return out.Take();
}

RowSums RowSums::Read(std::string_view bytes) {
  ByteReader in(bytes);
  RowSums sums;
  sums.rows = in.U64();
  const std::uint64_t count = in.U64();
  for (std::uint64_t i = 0; i < count; ++i) {
    sums.hi.push_back(in.F64());
    sums.lo.push_back(in.F64());
  }
  return sums;
}

std::unique_ptr<RowSumKernel> MakeRowSumKernel(std::string_view recipe) {
  ByteReader in(recipe);
  const std::uint64_t kind = in.U64();
  if (kind == detail::kRefinePassRecipe) return detail::MakeRefinePassKernel(detail::RefinePass::Read(in));
  throw std::invalid_argument("MakeRowSumKernel: no kernel has the recipe kind " + std::to_string(kind));
}

SummingReplay SumOverReplay(RowReplay replay) {
  return [replay = std::move(replay)](std::string_view recipe) {
    const std::unique_ptr<RowSumKernel> kernel = MakeRowSumKernel(recipe);
    replay([&kernel](const UsedRow& row) { kernel->Add(row); });
    return kernel->Finish();
  };
}

}  // namespace stepledger
