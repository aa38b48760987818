// Which shard holds a net, and where the shards listen (the topology file).
//
// The shard function is published and the same in every client and server:
//   ShardOf(name, shards) = JumpHash(Fnv1a64(utf8 bytes of name), shards)
// FNV-1a 64 (Fowler, Noll, Vo: offset basis 0xcbf29ce484222325, prime 0x100000001b3)
// and jump consistent hashing (Lamping & Veach, "A Fast, Minimal Memory, Consistent
// Hash Algorithm", 2014, figure 1). tests/data/shard_vectors.tsv pins its values; the
// Python package (etchguard._shards) computes the same.
#pragma once

#include <cstdint>
#include <stdexcept>
#include <string>
#include <vector>

namespace etchguard::client {

std::uint64_t Fnv1a64(const std::string& bytes);
// A bucket in [0, buckets) for `key`; throws std::invalid_argument when buckets < 1.
std::int32_t JumpHash(std::uint64_t key, std::int32_t buckets);
inline std::int32_t ShardOf(const std::string& net, std::int32_t shards) {
  return JumpHash(Fnv1a64(net), shards);
}

// A topology file that cannot be read or parsed: the message names file:line and field.
class TopologyError : public std::runtime_error {
 public:
  using std::runtime_error::runtime_error;
};

// Shard k listens at addresses[k]. The file format is etchguard's own (see
// etchguard._shards): "etchguard-topology 1", "shards N", then "shard K ADDRESS" for
// every K, optionally "directory-cell DBU"; '#' comments and blank lines are ignored.
struct Topology {
  std::vector<std::string> addresses;
  std::int64_t directory_cell = 50000;  // DBU, side of a metal directory cell

  std::int32_t shards() const { return static_cast<std::int32_t>(addresses.size()); }
  std::int32_t ShardOf(const std::string& net) const {
    return etchguard::client::ShardOf(net, shards());
  }
  // The canonical text and its FNV-1a 64 fingerprint, equal to the Python package's.
  std::string CanonicalText() const;
  std::uint64_t Fingerprint() const { return Fnv1a64(CanonicalText()); }
};

Topology ParseTopology(const std::string& text, const std::string& source = "<topology>");
Topology LoadTopology(const std::string& path);

}  // namespace etchguard::client
