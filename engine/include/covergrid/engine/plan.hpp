#pragma once
/// The plan: how a scenario's cells (model, n, p) are cut into chunks. A chunk
/// is a block of consecutive n rows times a block of consecutive p points of
/// one model; chunks are numbered model-major, then n-block, then p-block.
/// The chunk shape is also the cube's HDF5 chunk shape, so every write covers
/// whole storage chunks. The cut depends only on the grid's sizes, never on
/// threads, shards or ranks. Chunks are computed from their index, so a plan
/// takes the same few bytes whatever the grid's size.
#include "covergrid/engine/scenario.hpp"

#include <cstddef>
#include <iterator>

namespace covergrid::engine {

struct ChunkSpec {
  std::size_t id = 0;
  std::size_t model = 0;
  std::size_t n_begin = 0, n_count = 0;
  std::size_t p_begin = 0, p_count = 0;

  friend bool operator==(const ChunkSpec&, const ChunkSpec&) = default;
};

/// Every chunk of a plan as a random-access sequence of values, each computed
/// from its id (nothing is stored per chunk).
class ChunkList {
 public:
  ChunkList() = default;
  ChunkList(std::size_t models, std::size_t rows, std::size_t points, std::size_t n_block,
            std::size_t p_block);

  std::size_t size() const { return models_ * n_blocks_ * p_blocks_; }
  bool empty() const { return size() == 0; }
  /// The chunk with this id (id < size()).
  ChunkSpec operator[](std::size_t id) const;
  /// The same, throwing std::out_of_range for an id beyond the plan.
  ChunkSpec at(std::size_t id) const;
  ChunkSpec front() const { return (*this)[0]; }
  ChunkSpec back() const { return (*this)[size() - 1]; }

  class iterator {
   public:
    using iterator_category = std::input_iterator_tag;
    using value_type = ChunkSpec;
    using difference_type = std::ptrdiff_t;
    using pointer = void;
    using reference = ChunkSpec;
    iterator() = default;
    iterator(const ChunkList* list, std::size_t id) : list_(list), id_(id) {}
    ChunkSpec operator*() const { return (*list_)[id_]; }
    iterator& operator++() {
      ++id_;
      return *this;
    }
    iterator operator++(int) {
      iterator old = *this;
      ++id_;
      return old;
    }
    bool operator==(const iterator& o) const { return id_ == o.id_; }

   private:
    const ChunkList* list_ = nullptr;
    std::size_t id_ = 0;
  };
  iterator begin() const { return {this, 0}; }
  iterator end() const { return {this, size()}; }

 private:
  std::size_t models_ = 0, rows_ = 0, points_ = 0;
  std::size_t n_block_ = 1, p_block_ = 1;
  std::size_t n_blocks_ = 0, p_blocks_ = 0;
};

struct Plan {
  std::size_t n_block = 1;  // rows per chunk (the last block may be shorter)
  std::size_t p_block = 1;  // p points per chunk (idem)
  ChunkList chunks;
};

/// Cells per chunk the plan aims at (p-block first, then as many n rows as fit).
inline constexpr std::size_t plan_target_cells = 2048;

Plan make_plan(const Scenario& scenario, std::size_t target_cells = plan_target_cells);

}  // namespace covergrid::engine
