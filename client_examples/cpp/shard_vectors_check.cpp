// Checks the C++ shard function against tests/data/shard_vectors.tsv (the file the
// Python tests read too) and prints "vectors: N agree, M differ"; exit 1 on any mismatch.
//   etchguard_shard_vectors_check tests/data/shard_vectors.tsv
#include <cstdio>
#include <fstream>
#include <iostream>
#include <sstream>
#include <string>

#include "etchguard/shards.hpp"

namespace {

std::string FromHex(const std::string& hex) {
  std::string out;
  for (std::size_t i = 0; i + 1 < hex.size(); i += 2) {
    out.push_back(static_cast<char>(std::stoi(hex.substr(i, 2), nullptr, 16)));
  }
  return out;
}

}  // namespace

int main(int argc, char** argv) {
  if (argc != 2) {
    std::cerr << "usage: " << argv[0] << " shard_vectors.tsv\n";
    return 2;
  }
  std::ifstream in(argv[1]);
  if (!in) {
    std::cerr << argv[1] << ": cannot read\n";
    return 2;
  }
  int passed = 0, failed = 0, number = 0;
  for (std::string line; std::getline(in, line);) {
    ++number;
    if (line.empty() || line[0] == '#') continue;
    std::istringstream cols(line);
    std::string hex, hash, shards, shard;
    std::getline(cols, hex, '\t');
    std::getline(cols, hash, '\t');
    std::getline(cols, shards, '\t');
    std::getline(cols, shard, '\t');
    const std::string name = FromHex(hex);
    const std::uint64_t want_hash = std::stoull(hash, nullptr, 16);
    const std::int32_t want_shard = std::stoi(shard);
    const std::uint64_t got_hash = etchguard::client::Fnv1a64(name);
    const std::int32_t got_shard = etchguard::client::ShardOf(name, std::stoi(shards));
    if (got_hash == want_hash && got_shard == want_shard) {
      ++passed;
    } else {
      ++failed;
      std::printf("line %d: fnv %016llx (want %s), shard %d (want %d)\n", number,
                  static_cast<unsigned long long>(got_hash), hash.c_str(), got_shard, want_shard);
    }
  }
  std::printf("vectors: %d agree, %d differ\n", passed, failed);
  return failed == 0 && passed > 0 ? 0 : 1;
}
