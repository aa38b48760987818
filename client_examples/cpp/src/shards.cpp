// The shard function and the topology file (see include/etchguard/shards.hpp).
#include "etchguard/shards.hpp"

#include <cctype>
#include <fstream>
#include <map>
#include <sstream>

namespace etchguard::client {

std::uint64_t Fnv1a64(const std::string& bytes) {
  std::uint64_t h = 0xcbf29ce484222325ULL;
  for (unsigned char byte : bytes) {
    h ^= byte;
    h *= 0x100000001b3ULL;  // modulo 2^64 by unsigned wrap-around
  }
  return h;
}

std::int32_t JumpHash(std::uint64_t key, std::int32_t buckets) {
  if (buckets < 1) throw std::invalid_argument("JumpHash needs at least one bucket");
  std::int64_t b = -1, j = 0;
  while (j < buckets) {
    b = j;
    key = key * 2862933555777941757ULL + 1;
    j = static_cast<std::int64_t>((b + 1) * (double(1LL << 31) / double((key >> 33) + 1)));
  }
  return static_cast<std::int32_t>(b);
}

namespace {

constexpr const char* kHeader = "etchguard-topology";
constexpr int kFormat = 1;
constexpr long kMaxShards = 1L << 16;

[[noreturn]] void Fail(const std::string& where, const std::string& field, const std::string& what) {
  throw TopologyError(where + ": " + field + ": " + what);
}

bool AllDigits(const std::string& s) {
  if (s.empty() || s.size() > 9) return false;
  for (unsigned char c : s) {
    if (!std::isdigit(c)) return false;
  }
  return true;
}

void CheckAddress(const std::string& address, const std::string& where) {
  if (address.rfind("unix:", 0) == 0) {
    if (address.size() == 5) Fail(where, "address", "a unix address needs a path");
    return;
  }
  auto colon = address.rfind(':');
  std::string port = colon == std::string::npos ? "" : address.substr(colon + 1);
  if (colon == std::string::npos || colon == 0 || !AllDigits(port) || std::stol(port) < 1 ||
      std::stol(port) > 65535) {
    Fail(where, "address", "'" + address + "' is not host:port (port 1-65535) or unix:/path");
  }
}

}  // namespace

std::string Topology::CanonicalText() const {
  std::ostringstream out;
  out << kHeader << ' ' << kFormat << '\n' << "shards " << addresses.size() << '\n'
      << "directory-cell " << directory_cell << '\n';
  for (std::size_t k = 0; k < addresses.size(); ++k) out << "shard " << k << ' ' << addresses[k] << '\n';
  return out.str();
}

Topology ParseTopology(const std::string& text, const std::string& source) {
  std::istringstream lines(text);
  std::string raw;
  int number = 0;
  bool header_seen = false;
  long count = -1;
  long long cell = -1;
  std::map<long, std::string> addresses;
  while (std::getline(lines, raw)) {
    ++number;
    std::istringstream words_in(raw);
    std::vector<std::string> words;
    for (std::string w; words_in >> w;) words.push_back(w);
    if (words.empty() || words[0][0] == '#') continue;
    const std::string where = source + ":" + std::to_string(number);
    if (!header_seen) {
      if (words.size() != 2 || words[0] != kHeader) {
        Fail(where, "header", "the first line must be 'etchguard-topology 1'");
      }
      if (words[1] != std::to_string(kFormat)) Fail(where, "header", "format '" + words[1] + "' is not known");
      header_seen = true;
    } else if (words[0] == "shards") {
      if (count >= 0) Fail(where, "shards", "given twice");
      if (words.size() != 2 || !AllDigits(words[1])) Fail(where, "shards", "must be 'shards N'");
      count = std::stol(words[1]);
      if (count < 1 || count > kMaxShards) Fail(where, "shards", "must be 1 to 65536");
    } else if (words[0] == "directory-cell") {
      if (cell >= 0) Fail(where, "directory-cell", "given twice");
      if (words.size() != 2 || !AllDigits(words[1]) || std::stoll(words[1]) < 1) {
        Fail(where, "directory-cell", "must be 'directory-cell N' with N >= 1 DBU");
      }
      cell = std::stoll(words[1]);
    } else if (words[0] == "shard") {
      if (count < 0) Fail(where, "shard", "'shards N' must come before the first shard line");
      if (words.size() != 3) Fail(where, "shard", "must be 'shard K ADDRESS'");
      if (!AllDigits(words[1]) || std::stol(words[1]) >= count) {
        Fail(where, "shard", "index '" + words[1] + "' is not in 0 .. " + std::to_string(count - 1));
      }
      long k = std::stol(words[1]);
      if (addresses.count(k)) Fail(where, "shard", "shard " + words[1] + " is given twice");
      CheckAddress(words[2], where);
      addresses[k] = words[2];
    } else {
      Fail(where, "entry", "unknown entry '" + words[0] + "' (expected 'shards' or 'shard')");
    }
  }
  if (!header_seen) Fail(source, "header", "empty: needs 'etchguard-topology 1'");
  if (count < 0) Fail(source, "shards", "no 'shards N' line");
  Topology topology;
  if (cell >= 0) topology.directory_cell = cell;
  for (long k = 0; k < count; ++k) {
    auto found = addresses.find(k);
    if (found == addresses.end()) Fail(source, "shard", "no address for shard " + std::to_string(k));
    topology.addresses.push_back(found->second);
  }
  return topology;
}

Topology LoadTopology(const std::string& path) {
  std::ifstream in(path);
  if (!in) throw TopologyError(path + ": cannot read the topology");
  std::ostringstream text;
  text << in.rdbuf();
  return ParseTopology(text.str(), path);
}

}  // namespace etchguard::client
