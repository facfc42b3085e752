#pragma once
// All subsets by a regression tree over the triangular factor (not installed): the default
// search of all_subsets.cpp. See subset_tree.cpp for the method and its guarantees.

#include <atomic>
#include <cstddef>
#include <cstdint>
#include <memory>
#include <mutex>
#include <vector>

namespace stepledger::selection_detail {

class SearchContext;

/// A kept model: RSS (data units) and its sorted design term indices.
struct SubsetEntry {
  double rss = 0;
  std::vector<std::size_t> terms;
};

/// The best `capacity` models of every size by RSS, shared by the threads of a search. Offer
/// takes a lock; the admission threshold of every size (the worst kept RSS once the size is
/// full, +infinity before) is read without one. The kept models do not depend on the order
/// of the offers: RSS equal within the tie tolerance orders by the term indices (plan order).
class SubsetBoard {
 public:
  SubsetBoard(std::size_t sizes, std::size_t capacity);
  /// Whether a model of this size and RSS could be kept now.
  bool Admits(std::size_t size, double rss) const;
  void Offer(std::size_t size, double rss, std::vector<std::size_t> sorted_terms);
  /// True when no model of a size in [lo, hi] with RSS >= bound could be kept (also when no
  /// recordable size is in [lo, hi]).
  bool CanPrune(double bound, std::ptrdiff_t lo, std::ptrdiff_t hi) const;
  std::size_t sizes() const { return boards_.size(); }
  /// Not thread-safe: after the search.
  const std::vector<std::vector<SubsetEntry>>& boards() const { return boards_; }
  /// Models kept so far (any thread).
  std::size_t kept() const { return kept_.load(std::memory_order_relaxed); }

 private:
  std::vector<std::vector<SubsetEntry>> boards_;
  std::unique_ptr<std::atomic<double>[]> threshold_;
  std::size_t capacity_;
  std::mutex mutex_;
  std::atomic<std::size_t> kept_{0};
};

/// Counts of a regression-tree search.
struct SubsetTreeStats {
  std::uint64_t nodes = 0;             ///< nodes whose factor was formed
  std::uint64_t models_evaluated = 0;  ///< models whose RSS was read (each subset at most once)
};

/// Runs the regression tree over the free terms (plan order) on the context's factor; keep
/// terms and the base columns are in every model. Fills the board (sizes count free terms,
/// up to max_free). threads >= 1.
SubsetTreeStats RunSubsetTree(SearchContext& ctx, const std::vector<std::size_t>& free_terms,
                              std::size_t max_free, SubsetBoard& board);

}  // namespace stepledger::selection_detail
