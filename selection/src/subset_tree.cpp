// All subsets by a regression tree over the triangular factor, with preordering and bounds on
// every size a subtree holds (the tree of Gatu and Kontoghiorghes, "Branch-and-bound
// algorithms for computing the best-subset regression models", JCGS 15, 2006, whose bound is
// that of Furnival and Wilson, Technometrics 16, 1974).
//
// The problem is first reduced to the free terms: the factor's columns are ordered base, keep,
// free terms (plan order), response and triangularised once (LAPACK dgeqrf); the trailing
// block is the triangle R of the free columns and y with base and keep projected out.
//
// A node is an ordered list S of n terms with its triangle R (columns in S's order, y last)
// and a count k of leading terms that every model of its subtree holds. Its subtree is every
// T with S[0..k) within T within S. Because R is triangular, the RSS of each leading model
// S[0..i) is the sum of squares of y's column below row i: the node yields its n - k models of
// sizes k+1..n at once, for O(n) work. Child j (k <= j <= n-2) drops S[j] and holds S[0..j):
// its subtree holds sizes j+1..n-1 and every model in it has RSS >= RSS(S minus S[j]) (RSS
// never falls when a term leaves), so it is cut when that bound is above the kept models of
// every one of those sizes (the board's thresholds; max_terms drops the larger sizes). Every
// subset is read exactly once, as a leading model of one node.
//
// Preordering: at a node with at least kPreorderFree free terms the free terms are sorted by
// the RSS increase of dropping each, largest first (increments from the inverse of the free
// block of R, LAPACK dtrtri: beta_j^2 / [C]_jj, a group's beta_G' [C_GG]^-1 beta_G), and the
// free block is triangularised again (dgeqrf). The leading models are then the ones that keep
// the strongest terms (good models early), and the children with the largest subtrees drop the
// strongest terms, so their bounds are the highest. The increments also give each child's
// bound before its factor is formed; only a clear cut (kEstimateMargin) is taken on them.
// Children are visited from the smallest subtree (j = n-2) to the largest, so the strong
// models that fill the board come before the large subtrees that it should cut.
//
// A child's factor: drop S[j]'s d columns from R and restore the triangle with Givens
// rotations (LAPACK dlartg, BLAS drot) on rows j.., O(d (q - c_j)^2); never a refactorisation.
//
// Tolerance (SearchOptions::subset_tolerance = tau > 0): every cut compares (1 + tau) times the
// bound with the thresholds, so a subtree is also cut when it could only beat the kept models by
// less than the fraction tau of their RSS. When a model B of size s is cut, the s-th threshold
// was then below (1 + tau) RSS(B), and thresholds only fall: the final r-th model of size s has an
// RSS at most (1 + tau) times that of the r-th best model of size s (if any of the r best was cut,
// through it; else the r best are all on the board). The cuts now depend on the order in which
// the board filled, so such a search runs on one thread: its list depends on the data alone.
//
// Threads: idle workers take subtrees that a busy worker hands out (children with at least
// kShareFree free terms) from a shared queue; the board is shared. Each subset is read at the
// same node by the same arithmetic whatever the thread that reads it (the tree does not depend
// on the order of work), and a cut only drops models the final board would not keep (the
// thresholds only fall), so the kept models and their RSS are the same bits for any thread
// count.

#include "subset_tree.h"

#include <algorithm>
#include <chrono>
#include <condition_variable>
#include <cmath>
#include <deque>
#include <limits>
#include <thread>

#include "stepledger/engine/linear_algebra_threads.h"

#include <armadillo>

#include "search_internal.h"
#include "stepledger/engine/errors.h"

extern "C" {
void dlartg_(const double* f, const double* g, double* c, double* s, double* r);
void drot_(const int* n, double* x, const int* incx, double* y, const int* incy, const double* c,
           const double* s);
// Inverse of a triangular matrix in place; info > 0: A(info,info) = 0 exactly.
void dtrtri_(const char* uplo, const char* diag, const int* n, double* a, const int* lda, int* info,
             std::size_t, std::size_t);
void dgeqrf_(const int* m, const int* n, double* a, const int* lda, double* tau, double* work,
             const int* lwork, int* info);
}

namespace stepledger::selection_detail {

// ---- the board ------------------------------------------------------------------------------

namespace {

bool Better(const SubsetEntry& a, const SubsetEntry& b) {
  if (!ScoresTie(a.rss, b.rss)) return a.rss < b.rss;
  return a.terms < b.terms;
}

constexpr double kInfinity = std::numeric_limits<double>::infinity();

}  // namespace

SubsetBoard::SubsetBoard(std::size_t sizes, std::size_t capacity)
    : boards_(sizes), threshold_(new std::atomic<double>[sizes]), capacity_(capacity) {
  for (std::size_t size = 0; size < sizes; ++size) threshold_[size].store(kInfinity);
}

bool SubsetBoard::Admits(std::size_t size, double rss) const {
  if (size >= boards_.size()) return false;
  const double threshold = threshold_[size].load(std::memory_order_relaxed);
  return rss <= threshold || ScoresTie(rss, threshold);
}

void SubsetBoard::Offer(std::size_t size, double rss, std::vector<std::size_t> sorted_terms) {
  std::lock_guard<std::mutex> lock(mutex_);
  auto& board = boards_[size];
  if (board.size() == capacity_ && !(rss <= board.back().rss || ScoresTie(rss, board.back().rss))) return;
  SubsetEntry entry{rss, std::move(sorted_terms)};
  board.insert(std::upper_bound(board.begin(), board.end(), entry, Better), std::move(entry));
  if (board.size() > capacity_) {
    board.pop_back();
  } else {
    kept_.fetch_add(1, std::memory_order_relaxed);
  }
  if (board.size() == capacity_) threshold_[size].store(board.back().rss, std::memory_order_relaxed);
}

bool SubsetBoard::CanPrune(double bound, std::ptrdiff_t lo, std::ptrdiff_t hi) const {
  lo = std::max<std::ptrdiff_t>(lo, 0);
  hi = std::min<std::ptrdiff_t>(hi, static_cast<std::ptrdiff_t>(boards_.size()) - 1);
  for (std::ptrdiff_t size = lo; size <= hi; ++size) {
    const double threshold = threshold_[static_cast<std::size_t>(size)].load(std::memory_order_relaxed);
    if (!(bound > threshold) || ScoresTie(bound, threshold)) return false;
  }
  return true;
}

// ---- the tree -------------------------------------------------------------------------------

namespace {

/// Free terms at or above which a node is preordered (below, the reordering costs more than
/// the subtree it could cut; measured with bench/select_bench).
constexpr std::size_t kPreorderFree = 3;
/// Free terms at or above which a child may be handed to an idle thread.
constexpr std::size_t kShareFree = 7;
/// A child is cut on its estimated bound only when the bound shrunk by this relative margin
/// still cuts (the increments come from an inverse, accurate to about cond(R) * eps; the margin
/// used is the larger of this and 100 cond_1(R) eps, see Preorder); otherwise its factor is
/// formed and the bound read from it.
constexpr double kEstimateMargin = 1e-7;

struct Node {
  std::vector<std::uint32_t> terms;  // slots into the free terms, node order
  std::size_t fixed = 0;
  std::size_t dim = 0;               // columns of the triangle, y included
  std::vector<double> r;             // row-major, leading dimension = the root's dim
};

class Shared {
 public:
  Shared(SearchContext& ctx, const std::vector<std::size_t>& free_terms, std::size_t max_free,
         SubsetBoard& board)
      : ctx(ctx), free_terms(free_terms), max_free(max_free), board(board) {}
  SearchContext& ctx;
  const std::vector<std::size_t>& free_terms;
  std::vector<std::size_t> width;  // columns per slot
  std::size_t ld = 0;
  double y_scale2 = 1;
  std::size_t max_free;
  SubsetBoard& board;
  double widen = 1;  // 1 + tau: a bound is compared with the thresholds after this factor

  // Work sharing.
  std::mutex mutex;
  std::condition_variable wake;
  std::deque<Node> queue;
  std::size_t busy = 0;
  std::atomic<std::size_t> idle{0};
  std::size_t threads = 1;

  // Progress: every worker adds its nodes; the caller's worker sends the events (observers need
  // not be thread-safe), next_report_ms is its own.
  std::atomic<std::uint64_t> nodes{0};
  std::chrono::steady_clock::time_point started = std::chrono::steady_clock::now();
  std::int64_t next_report_ms = 0;
  std::int64_t period_ms = 500;
};

class Worker {
 public:
  Worker(Shared& shared, bool caller)
      : s_(shared), caller_(caller), in_set_(shared.ctx.design().terms.size(), 0) {
    for (std::size_t term : shared.ctx.keep_terms()) in_set_[term] = 1;
  }

  void Visit(Node& node, std::size_t depth) {
    ++stats.nodes;
    if ((stats.nodes & 1023) == 0) Progress(1024);
    const std::size_t n = node.terms.size();
    const std::size_t k = node.fixed;
    const std::size_t ld = s_.ld;
    const bool preordered = n - k >= kPreorderFree;
    if (preordered) Preorder(node);
    Offsets(node);
    // Leading models S[0..i), sizes k+1..n: suffix sums of y's column.
    const std::size_t q = node.dim - 1;
    double tail = 0;
    std::size_t row = node.dim;
    leading_rss_.assign(n + 1, 0);
    for (std::size_t size = n; size > k; --size) {
      while (row > offsets_[size]) {
        --row;
        const double v = node.r[row * ld + q];
        tail += v * v;
      }
      leading_rss_[size] = tail / s_.y_scale2;
    }
    const double rss = leading_rss_[n];
    for (std::size_t size = k + 1; size <= n; ++size) {
      ++stats.models_evaluated;
      if (size > s_.max_free || !s_.board.Admits(size, leading_rss_[size])) continue;
      Record(node, size, leading_rss_[size]);
    }
    if (n < 2) return;
    // Children, smallest subtree first.
    const std::vector<double> increments = preordered ? increments_ : std::vector<double>();
    const double margin = estimate_margin_;  // Visit below overwrites the member
    for (std::size_t j = n - 1; j-- > k;) {
      const auto lo = static_cast<std::ptrdiff_t>(j + 1);
      const auto hi = static_cast<std::ptrdiff_t>(std::min(n - 1, s_.max_free));
      if (lo > hi) continue;
      if (preordered && margin < 1e-2 &&
          s_.board.CanPrune((rss + increments[j]) * (1 - margin) * s_.widen, lo, hi)) {
        continue;
      }
      Node& child = Slot(depth + 1);
      MakeChild(node, j, child);
      const double child_rss = ChildRss(child);
      if (s_.board.CanPrune(child_rss * s_.widen, lo, hi)) continue;
      if (n - 1 - (j + 1) >= kShareFree && s_.idle.load(std::memory_order_relaxed) > 0) {
        Hand(child);
        continue;
      }
      Visit(child, depth + 1);
      // Visit may have re-used deeper slots only; this node's offsets are recomputed below.
      Offsets(node);
    }
  }

  void Run() {
    std::unique_lock<std::mutex> lock(s_.mutex);
    for (;;) {
      if (!s_.queue.empty()) {
        Node node = std::move(s_.queue.front());
        s_.queue.pop_front();
        ++s_.busy;
        lock.unlock();
        Visit(node, 0);
        lock.lock();
        --s_.busy;
        if (s_.busy == 0 && s_.queue.empty()) s_.wake.notify_all();
        continue;
      }
      if (s_.busy == 0) break;
      s_.idle.fetch_add(1);
      const auto ready = [this] { return !s_.queue.empty() || s_.busy == 0; };
      if (caller_) {
        // The caller's worker keeps the progress going while the others work.
        const auto period = std::chrono::milliseconds(std::max<std::int64_t>(s_.period_ms, 50));
        while (!s_.wake.wait_for(lock, period, ready)) {
          lock.unlock();
          Progress(0);
          lock.lock();
        }
      } else {
        s_.wake.wait(lock, ready);
      }
      s_.idle.fetch_sub(1);
    }
    lock.unlock();
    Progress(stats.nodes & 1023);
  }

  SubsetTreeStats stats;

 private:
  Node& Slot(std::size_t depth) {
    while (pool_.size() <= depth) {
      pool_.emplace_back();
      pool_.back().r.assign(s_.ld * s_.ld, 0);
    }
    return pool_[depth];
  }

  void Hand(const Node& child) {
    {
      std::lock_guard<std::mutex> lock(s_.mutex);
      s_.queue.push_back(child);
    }
    s_.wake.notify_one();
  }

  void Progress(std::uint64_t add) {
    const std::uint64_t total = s_.nodes.fetch_add(add, std::memory_order_relaxed) + add;
    if (!caller_) return;
    const auto elapsed = std::chrono::duration_cast<std::chrono::milliseconds>(
                             std::chrono::steady_clock::now() - s_.started).count();
    if (elapsed < s_.next_report_ms) return;
    s_.next_report_ms = elapsed + s_.period_ms;
    s_.ctx.sink().OnSubsetProgress({total, s_.board.kept(), static_cast<double>(elapsed) / 1000.0});
  }

  void Offsets(const Node& node) {
    offsets_.resize(node.terms.size() + 1);
    offsets_[0] = 0;
    for (std::size_t t = 0; t < node.terms.size(); ++t) offsets_[t + 1] = offsets_[t] + s_.width[node.terms[t]];
  }

  void Record(const Node& node, std::size_t size, double rss) {
    // Keep terms are listed too, as every enumeration lists them.
    std::vector<std::size_t> terms(s_.ctx.keep_terms().begin(), s_.ctx.keep_terms().end());
    terms.reserve(terms.size() + size);
    for (std::size_t t = 0; t < size; ++t) terms.push_back(s_.free_terms[node.terms[t]]);
    std::sort(terms.begin(), terms.end());
    if (s_.ctx.options().hierarchy) {
      for (std::size_t t = 0; t < size; ++t) in_set_[s_.free_terms[node.terms[t]]] = 1;
      const bool holds = s_.ctx.SatisfiesHierarchy(in_set_);
      for (std::size_t t = 0; t < size; ++t) in_set_[s_.free_terms[node.terms[t]]] = 0;
      if (!holds) return;
    }
    s_.board.Offer(size, rss, std::move(terms));
  }

  double ChildRss(const Node& child) const {
    const double rho = child.r[(child.dim - 1) * s_.ld + child.dim - 1];
    return rho * rho / s_.y_scale2;
  }

  /// Rotates rows (i, i+1) over columns [from, to) so that entry (i+1, from) becomes 0.
  void RotateRows(std::vector<double>& r, std::size_t i, std::size_t from, std::size_t to) const {
    const std::size_t ld = s_.ld;
    double* upper = &r[i * ld + from];
    double* lower = &r[(i + 1) * ld + from];
    double c = 0, sn = 0, rr = 0;
    dlartg_(upper, lower, &c, &sn, &rr);
    upper[0] = rr;
    lower[0] = 0;
    const int count = static_cast<int>(to - from - 1);
    const int one = 1;
    if (count > 0) drot_(&count, upper + 1, &one, lower + 1, &one, &c, &sn);
  }

  /// child := node without term j (its columns dropped, the triangle restored by Givens).
  void MakeChild(const Node& node, std::size_t j, Node& child) {
    const std::size_t ld = s_.ld;
    const std::size_t a = offsets_[j];
    const std::size_t d = s_.width[node.terms[j]];
    const std::size_t dim = node.dim;
    const std::size_t new_dim = dim - d;
    child.terms.assign(node.terms.begin(), node.terms.end());
    child.terms.erase(child.terms.begin() + static_cast<std::ptrdiff_t>(j));
    child.fixed = j;
    child.dim = new_dim;
    for (std::size_t i = 0; i < dim; ++i) {
      const double* from = &node.r[i * ld];
      double* to = &child.r[i * ld];
      if (i < a) {
        std::copy(from + i, from + a, to + i);
        std::copy(from + a + d, from + dim, to + a);
      } else {
        // Row i holds parent columns >= i, i.e. new columns >= i - d (and >= a).
        const std::size_t first = std::max(a, i >= d ? i - d : 0);
        std::fill(to + a, to + first, 0.0);
        std::copy(from + first + d, from + dim, to + first);
      }
    }
    for (std::size_t column = a; column < new_dim; ++column) {
      const std::size_t bottom = std::min(column + d, dim - 1);
      for (std::size_t i = bottom; i > column; --i) RotateRows(child.r, i - 1, column, new_dim);
    }
  }

  /// Sorts the free terms by the RSS increase of dropping each (largest first; slot order on
  /// ties) and triangularises the free block again when the order changed. Leaves the sorted
  /// increments in increments_ (node order).
  void Preorder(Node& node) {
    const std::size_t ld = s_.ld;
    const std::size_t n = node.terms.size();
    const std::size_t k = node.fixed;
    Offsets(node);
    const std::size_t start = offsets_[k];
    const std::size_t q = node.dim - 1;
    const std::size_t t = q - start;  // free columns
    // W = inverse of the free block of R (row-major upper = column-major lower).
    inverse_.resize(t * t);
    for (std::size_t i = 0; i < t; ++i) {
      for (std::size_t c = 0; c < t; ++c) inverse_[i * t + c] = c >= i ? node.r[(start + i) * ld + start + c] : 0.0;
    }
    const int order = static_cast<int>(t);
    int info = 0;
    const char lower = 'L', non_unit = 'N';
    dtrtri_(&lower, &non_unit, &order, inverse_.data(), &order, &info, 1, 1);
    if (info != 0) {
      throw NumericalError("all-subsets: the factor of a subset is singular at column " + std::to_string(info));
    }
    // The increments are accurate to about cond(R) * eps relative: a cut on them needs a margin
    // at least that wide. cond_1(R) = ||R||_1 ||R^-1||_1 (column sums of the free block and of
    // its inverse); past 1e-2 no estimate is trusted and every child's factor is formed.
    double norm = 0, inverse_norm = 0;
    for (std::size_t c = 0; c < t; ++c) {
      double column = 0, inverse_column = 0;
      for (std::size_t i = 0; i <= c; ++i) {
        column += std::fabs(node.r[(start + i) * ld + start + c]);
        inverse_column += std::fabs(inverse_[i * t + c]);
      }
      norm = std::max(norm, column);
      inverse_norm = std::max(inverse_norm, inverse_column);
    }
    estimate_margin_ = std::max(kEstimateMargin, 100.0 * norm * inverse_norm * std::numeric_limits<double>::epsilon());
    beta_.assign(t, 0);
    for (std::size_t i = 0; i < t; ++i) {
      double sum = 0;
      for (std::size_t c = i; c < t; ++c) sum += inverse_[i * t + c] * node.r[(start + c) * ld + q];
      beta_[i] = sum;
    }
    std::vector<std::pair<double, std::uint32_t>> keyed;
    keyed.reserve(n - k);
    for (std::size_t term = k; term < n; ++term) {
      const std::size_t g = offsets_[term] - start;
      const std::size_t d = s_.width[node.terms[term]];
      double increment = 0;
      if (d == 1) {
        double c_gg = 0;
        for (std::size_t c = g; c < t; ++c) c_gg += inverse_[g * t + c] * inverse_[g * t + c];
        increment = beta_[g] * beta_[g] / c_gg;
      } else {
        arma::mat c_gg(d, d, arma::fill::zeros);
        arma::vec beta_g(d);
        for (std::size_t u = 0; u < d; ++u) {
          beta_g(u) = beta_[g + u];
          for (std::size_t v = 0; v < d; ++v) {
            double sum = 0;
            for (std::size_t c = g + std::max(u, v); c < t; ++c) sum += inverse_[(g + u) * t + c] * inverse_[(g + v) * t + c];
            c_gg(u, v) = sum;
          }
        }
        arma::vec solved;
        if (!arma::solve(solved, c_gg, beta_g, arma::solve_opts::no_approx)) {
          throw NumericalError("all-subsets: a group's block of the inverse is singular");
        }
        increment = arma::dot(beta_g, solved);
      }
      keyed.emplace_back(increment / s_.y_scale2, node.terms[term]);
    }
    std::vector<std::size_t> permutation(n - k);
    for (std::size_t i = 0; i < permutation.size(); ++i) permutation[i] = i;
    std::stable_sort(permutation.begin(), permutation.end(), [&keyed](std::size_t x, std::size_t y) {
      if (keyed[x].first != keyed[y].first) return keyed[x].first > keyed[y].first;
      return keyed[x].second < keyed[y].second;
    });
    increments_.assign(n, 0);
    bool changed = false;
    for (std::size_t i = 0; i < permutation.size(); ++i) {
      increments_[k + i] = keyed[permutation[i]].first;
      if (permutation[i] != i) changed = true;
    }
    if (!changed) return;
    // New column order of the free block (y stays last), from the old offsets.
    column_map_.clear();
    for (std::size_t i = 0; i < permutation.size(); ++i) {
      const std::size_t old_term = k + permutation[i];
      for (std::size_t c = offsets_[old_term]; c < offsets_[old_term + 1]; ++c) column_map_.push_back(c);
    }
    column_map_.push_back(q);
    const std::size_t block = t + 1;
    qr_.assign(block * block, 0);
    for (std::size_t c = 0; c < block; ++c) {
      for (std::size_t i = 0; i < block; ++i) qr_[c * block + i] = column_map_[c] >= start + i ? node.r[(start + i) * ld + column_map_[c]] : 0.0;
    }
    // The rows above the free block take the column permutation only.
    for (std::size_t i = 0; i < start; ++i) {
      row_copy_.assign(&node.r[i * ld + start], &node.r[i * ld + start] + block);
      for (std::size_t c = 0; c < block; ++c) node.r[i * ld + start + c] = row_copy_[column_map_[c] - start];
    }
    const int m = static_cast<int>(block);
    tau_.resize(block);
    int lwork = static_cast<int>(64 * block);
    work_.resize(static_cast<std::size_t>(lwork));
    dgeqrf_(&m, &m, qr_.data(), &m, tau_.data(), work_.data(), &lwork, &info);
    if (info != 0) throw NumericalError("all-subsets: dgeqrf argument " + std::to_string(-info));
    for (std::size_t i = 0; i < block; ++i) {
      for (std::size_t c = 0; c < block; ++c) node.r[(start + i) * ld + start + c] = c >= i ? qr_[c * block + i] : 0.0;
    }
    std::vector<std::uint32_t> sorted(node.terms.begin(), node.terms.begin() + static_cast<std::ptrdiff_t>(k));
    for (std::size_t i = 0; i < permutation.size(); ++i) sorted.push_back(node.terms[k + permutation[i]]);
    node.terms = std::move(sorted);
  }

  Shared& s_;
  bool caller_;  // runs on the thread that called RunSearch
  std::vector<char> in_set_;
  std::deque<Node> pool_;  // a deque: the nodes of the current path stay where they are as it grows
  std::vector<std::size_t> offsets_, column_map_;
  std::vector<double> leading_rss_, inverse_, beta_, increments_, qr_, tau_, work_, row_copy_;
  double estimate_margin_ = kEstimateMargin;  // of the last Preorder (see there)
};

}  // namespace

SubsetTreeStats RunSubsetTree(SearchContext& ctx, const std::vector<std::size_t>& free_terms,
                              std::size_t max_free, SubsetBoard& board) {
  Shared shared(ctx, free_terms, max_free, board);
  const Factor& factor = ctx.factor();
  // Columns: base, keep, free terms (plan order), y; triangularised once.
  std::vector<arma::uword> order(ctx.base_columns().begin(), ctx.base_columns().end());
  for (std::size_t term : ctx.keep_terms()) {
    for (std::size_t column : ctx.term_columns(term)) order.push_back(column);
  }
  const std::size_t fixed_columns = order.size();
  for (std::size_t term : free_terms) {
    shared.width.push_back(ctx.term_columns(term).size());
    for (std::size_t column : ctx.term_columns(term)) order.push_back(column);
  }
  order.push_back(factor.column_count());
  arma::mat permuted = factor.r.cols(arma::uvec(order));
  arma::mat unused_q, triangle;
  if (!arma::qr_econ(unused_q, triangle, permuted)) throw NumericalError("all-subsets: QR of the factor failed");
  const std::size_t dim = order.size() - fixed_columns;
  shared.ld = dim;
  const double y_scale = factor.scales.back();
  shared.y_scale2 = y_scale * y_scale;

  Node root;
  root.dim = dim;
  root.fixed = 0;
  for (std::size_t slot = 0; slot < free_terms.size(); ++slot) root.terms.push_back(static_cast<std::uint32_t>(slot));
  root.r.assign(dim * dim, 0);
  for (std::size_t i = 0; i < dim; ++i) {
    for (std::size_t c = i; c < dim; ++c) root.r[i * dim + c] = triangle(fixed_columns + i, fixed_columns + c);
  }
  // The model of no free term.
  {
    double tail = 0;
    for (std::size_t i = 0; i < dim; ++i) tail += root.r[i * dim + dim - 1] * root.r[i * dim + dim - 1];
    std::vector<char> in_set(ctx.design().terms.size(), 0);
    for (std::size_t term : ctx.keep_terms()) in_set[term] = 1;
    std::vector<std::size_t> keep(ctx.keep_terms().begin(), ctx.keep_terms().end());
    std::sort(keep.begin(), keep.end());
    if (ctx.SatisfiesHierarchy(in_set)) board.Offer(0, tail / shared.y_scale2, std::move(keep));
  }

  shared.widen = 1 + ctx.options().subset_tolerance;
  // A tolerance makes the cuts depend on the order of work: one thread (see the top). Otherwise
  // no more threads than OpenBLAS has room for (each is inside dtrtri and dgeqrf at times).
  const std::size_t threads =
      ctx.options().subset_tolerance > 0
          ? 1
          : ThreadsForLinearAlgebra(static_cast<std::size_t>(std::max(ctx.run().threads, 1)), "the all-subsets search");
  shared.threads = threads;
  shared.period_ms = static_cast<std::int64_t>(std::max(0.0, ctx.run().progress_seconds) * 1000.0);
  shared.next_report_ms = shared.period_ms;
  shared.queue.push_back(std::move(root));
  std::vector<std::unique_ptr<Worker>> workers;
  for (std::size_t w = 0; w < threads; ++w) workers.push_back(std::make_unique<Worker>(shared, w == 0));
  std::vector<std::thread> pool;
  std::exception_ptr failure;
  std::mutex failure_mutex;
  auto run = [&](std::size_t w) {
    try {
      workers[w]->Run();
    } catch (...) {
      std::lock_guard<std::mutex> lock(failure_mutex);
      if (!failure) failure = std::current_exception();
      // Let the others finish: this worker's subtree is abandoned.
      std::lock_guard<std::mutex> queue_lock(shared.mutex);
      --shared.busy;
      shared.queue.clear();
      shared.wake.notify_all();
    }
  };
  for (std::size_t w = 1; w < threads; ++w) pool.emplace_back(run, w);
  run(0);
  for (auto& thread : pool) thread.join();
  if (failure) std::rethrow_exception(failure);
  SubsetTreeStats stats;
  for (const auto& worker : workers) {
    stats.nodes += worker->stats.nodes;
    stats.models_evaluated += worker->stats.models_evaluated;
  }
  stats.models_evaluated += 1;  // the model of no free term
  return stats;
}

}  // namespace stepledger::selection_detail
