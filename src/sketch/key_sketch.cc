// Bottom-m key sketches and their candidate pairs; see key_sketch.h.
#include "sketch/key_sketch.h"

#include <algorithm>
#include <atomic>
#include <cmath>
#include <iterator>
#include <thread>

#include "sketch/lsh.h"
#include "sketch/mix.h"
#include "sketch/radix_sort.h"

namespace prefsift::sketch {
namespace {

void MergeInto(std::vector<uint64_t>* acc, const std::vector<uint64_t>& add, std::vector<uint64_t>* tmp) {
  tmp->clear();
  tmp->reserve(acc->size() + add.size());
  std::set_union(acc->begin(), acc->end(), add.begin(), add.end(), std::back_inserter(*tmp));
  acc->swap(*tmp);
}

void SortUnique(std::vector<uint64_t>* v) {
  std::sort(v->begin(), v->end());
  v->erase(std::unique(v->begin(), v->end()), v->end());
}

struct PartResult {
  std::vector<uint64_t> pairs;  // one per shared informative key: repeats kept
  std::vector<uint64_t> aside;  // set-aside keys: key << 32 | min(sketches holding it, 65535)
  KeyPairStats stats;
};

}  // namespace

void KeySketch(std::span<const uint64_t> shingles, uint64_t seed, std::span<uint32_t> out) {
  const size_t m = out.size();
  thread_local std::vector<uint32_t> v;
  v.clear();
  const uint64_t seed_mix = Mix(seed);
  for (uint64_t h : shingles) {
    const auto k = static_cast<uint32_t>(Mix(h ^ seed_mix) >> 32);
    if (k != kNoKey) v.push_back(k);
  }
  // The p smallest keys (repeats included) hold every distinct key below the
  // p-th; if they hold m distinct keys, those are the m smallest.
  size_t p = std::min(v.size(), 2 * m);
  if (p < v.size()) std::nth_element(v.begin(), v.begin() + static_cast<std::ptrdiff_t>(p), v.end());
  std::sort(v.begin(), v.begin() + static_cast<std::ptrdiff_t>(p));
  size_t distinct = static_cast<size_t>(std::unique(v.begin(), v.begin() + static_cast<std::ptrdiff_t>(p)) - v.begin());
  if (distinct < m && p < v.size()) {  // many repeats among the smallest: the whole set
    std::sort(v.begin(), v.end());
    distinct = static_cast<size_t>(std::unique(v.begin(), v.end()) - v.begin());
  }
  const size_t take = std::min(m, distinct);
  std::copy(v.begin(), v.begin() + static_cast<std::ptrdiff_t>(take), out.begin());
  std::fill(out.begin() + static_cast<std::ptrdiff_t>(take), out.end(), kNoKey);
}

std::vector<uint64_t> KeySketchPairs(std::span<const uint32_t> keys, uint32_t m, const KeyPairOptions& options,
                                     KeyPairStats* stats) {
  const size_t total = keys.size();
  const size_t n = m == 0 ? 0 : total / m;
  const uint32_t min_records = std::max<uint32_t>(options.min_records, 2);
  // Per place, one bit: its key is set aside (held by >= min_records
  // sketches). The number of sketches holding each set-aside key is kept once
  // per key (`aside_keys`), not per place.
  std::vector<uint64_t> aside_bits((total + 63) / 64, 0);
  auto is_aside = [&](size_t place) { return (aside_bits[place >> 6] >> (place & 63)) & 1u; };

  // 1. Key runs, one partition of the key space at a time (the top `bits` bits
  //    of the key), so the transient array is a share of the places. Entry =
  //    key << 32 | place; place = record * m + position. Sorting whole entries
  //    orders each key's run by place, so its records ascend.
  int bits = 0;
  while (bits < 12 && (total >> bits) > (size_t{1} << 21)) ++bits;
  const uint32_t parts = 1u << bits;
  const uint32_t threads = std::clamp<uint32_t>(options.threads, 1, parts);
  // Each partition's size, so a thread's buffer is allocated once at the size
  // of its largest partition (no doubling growth).
  std::vector<size_t> part_size(parts, 0);
  for (size_t place = 0; place < total; ++place) {
    const uint32_t k = keys[place];
    if (k != kNoKey) ++part_size[bits > 0 ? k >> (32 - bits) : 0];
  }
  std::vector<PartResult> acc(threads);
  // Sweep 1 counts the key runs and marks the set-aside places; sweep 2 (only
  // when pairs are wanted) sorts the partitions again and pairs the members of
  // informative runs. Two sweeps cost a second sort of every partition, but
  // with none set aside and options.only_with_template no pair is ever made.
  // Partitions are handed out one at a time (template text makes some far
  // larger than others); what a thread finds is merged in an order-free way
  // (counts summed, places marked, pairs and set-aside keys sorted below).
  std::atomic<uint32_t> next_part{0};
  const size_t largest = *std::max_element(part_size.begin(), part_size.end());  // parts >= 1
  auto work = [&](uint32_t t, bool make_pairs) {
    std::vector<uint64_t> buf, part_pairs;
    buf.reserve(largest);
    PartResult& mine = acc[t];
    for (uint32_t part; (part = next_part.fetch_add(1, std::memory_order_relaxed)) < parts;) {
      buf.clear();
      for (size_t place = 0; place < total; ++place) {
        const uint32_t k = keys[place];
        if (k == kNoKey || (bits > 0 && (k >> (32 - bits)) != part)) continue;
        buf.push_back((static_cast<uint64_t>(k) << 32) | place);
      }
      SortWords(buf);
      part_pairs.clear();
      size_t s = 0;
      while (s < buf.size()) {
        const uint64_t key = buf[s] >> 32;
        size_t e = s + 1;
        while (e < buf.size() && (buf[e] >> 32) == key) ++e;
        const size_t run = e - s;
        const bool frequent = run >= min_records;
        if (!make_pairs) {
          ++mine.stats.keys;
          if (frequent) {
            ++mine.stats.keys_set_aside;
            mine.stats.entries_set_aside += run;
            mine.aside.push_back((key << 32) | std::min<size_t>(run, 65535));
            for (size_t x = s; x < e; ++x) {  // words shared with other threads' places: atomic
              const auto place = static_cast<uint32_t>(buf[x]);
              std::atomic_ref<uint64_t>(aside_bits[place >> 6]).fetch_or(uint64_t{1} << (place & 63),
                                                                          std::memory_order_relaxed);
            }
          } else {
            mine.stats.largest_run = std::max<uint32_t>(mine.stats.largest_run, static_cast<uint32_t>(run));
          }
        } else if (!frequent) {
          // Places ascend within the run, so records do too (a sketch holds a key once).
          for (size_t x = s; x < e; ++x) {
            const auto a = static_cast<uint32_t>(static_cast<uint32_t>(buf[x]) / m);
            for (size_t y = x + 1; y < e; ++y) {
              part_pairs.push_back(PackPair(a, static_cast<uint32_t>(static_cast<uint32_t>(buf[y]) / m)));
            }
          }
        }
        s = e;
      }
      mine.pairs.insert(mine.pairs.end(), part_pairs.begin(), part_pairs.end());  // repeats kept: counted below
    }
  };
  auto sweep = [&](bool make_pairs) {
    next_part.store(0, std::memory_order_relaxed);
    if (threads == 1) {
      work(0, make_pairs);
      return;
    }
    std::vector<std::thread> pool;
    for (uint32_t t = 0; t < threads; ++t) pool.emplace_back(work, t, make_pairs);
    for (auto& th : pool) th.join();
  };
  sweep(false);
  uint64_t set_aside = 0;
  for (const PartResult& r : acc) set_aside += r.stats.keys_set_aside;
  std::vector<uint64_t> aside_keys;  // key << 32 | count, ascending by key
  aside_keys.reserve(set_aside);
  for (PartResult& r : acc) {
    aside_keys.insert(aside_keys.end(), r.aside.begin(), r.aside.end());
    std::vector<uint64_t>().swap(r.aside);
  }
  SortWords(aside_keys);
  auto aside_count = [&](uint32_t key) -> uint64_t {
    auto it = std::lower_bound(aside_keys.begin(), aside_keys.end(), static_cast<uint64_t>(key) << 32);
    return *it & 0xffffffffu;  // the key is there: its place is marked
  };
  if (set_aside == 0 && options.only_with_template) {
    KeyPairStats st;
    for (const PartResult& r : acc) {
      st.keys += r.stats.keys;
      st.largest_run = std::max(st.largest_run, r.stats.largest_run);
    }
    if (stats) *stats = st;
    return {};
  }
  sweep(true);
  std::vector<uint64_t> raw = std::move(acc[0].pairs);
  KeyPairStats st = acc[0].stats;
  std::vector<uint64_t> tmp;
  for (uint32_t t = 1; t < threads; ++t) {
    raw.insert(raw.end(), acc[t].pairs.begin(), acc[t].pairs.end());
    std::vector<uint64_t>().swap(acc[t].pairs);
    st.keys += acc[t].stats.keys;
    st.keys_set_aside += acc[t].stats.keys_set_aside;
    st.entries_set_aside += acc[t].stats.entries_set_aside;
    st.largest_run = std::max(st.largest_run, acc[t].stats.largest_run);
  }
  // Informative keys a record holds, and how many each pair shares: a pair is
  // a candidate when it shares at least min_shared_share of the smaller
  // record's informative keys (and at least one).
  std::vector<uint8_t> informative(n, 0);
  for (size_t place = 0; place < total; ++place) {
    informative[place / m] += static_cast<uint8_t>(keys[place] != kNoKey && !is_aside(place));
  }
  SortWords(raw);
  std::vector<uint64_t> pairs;
  for (size_t x = 0; x < raw.size();) {
    size_t y = x + 1;
    while (y < raw.size() && raw[y] == raw[x]) ++y;
    const uint32_t fewer = std::min(informative[PairFirst(raw[x])], informative[PairSecond(raw[x])]);
    const double need = std::max(1.0, std::ceil(options.min_shared_share * fewer));
    if (static_cast<double>(y - x) >= need) {
      pairs.push_back(raw[x]);
    } else {
      ++st.pairs_below_share;
    }
    x = y;
  }
  std::vector<uint64_t>().swap(raw);
  st.informative_pairs = pairs.size();

  // 2. Sorted neighbourhoods over set-aside keys, for the records with few
  //    informative keys. A record's set-aside keys ordered rarest first
  //    (fewest sketches, then key): its first chain_keys of them name the runs
  //    it joins, its first kOrderKeys order it within a run (then the record
  //    index). The rarest set-aside keys of copies of a popular prompt are the
  //    prompt's own, held by the copies alone; a copy with a word inserted
  //    loses a few of them but joins a run of the copies, and sits next to
  //    them, while prompts that share only stock sentences differ early.
  if (st.keys_set_aside > 0 && options.chain_keys > 0) {
    constexpr uint32_t kOrderKeys = 8;
    const auto below = static_cast<uint32_t>(std::max(1.0, std::ceil(options.chain_below_share * m)));
    std::vector<uint64_t> items;   // key << 32 | record
    std::vector<uint32_t> member;  // record -> its row in `order`
    std::vector<uint64_t> order;   // a row of kOrderKeys (count << 32 | key) per chain member, padded with ~0
    std::vector<uint64_t> own;
    for (size_t r = 0; r < n; ++r) {
      if (informative[r] >= below) continue;  // found through its informative keys
      own.clear();
      for (size_t q = 0; q < m; ++q) {
        const size_t place = r * m + q;
        if (is_aside(place)) own.push_back((aside_count(keys[place]) << 32) | keys[place]);
      }
      if (own.empty()) continue;
      std::sort(own.begin(), own.end());
      for (size_t q = 0; q < own.size() && q < options.chain_keys; ++q) {
        items.push_back((own[q] << 32) | r);  // the key (low half of own[q]) in the high half
      }
      own.resize(kOrderKeys, ~uint64_t{0});
      if (member.empty()) member.assign(n, 0);
      member[r] = static_cast<uint32_t>(order.size() / kOrderKeys);
      order.insert(order.end(), own.begin(), own.end());
    }
    std::sort(items.begin(), items.end(), [&](uint64_t a, uint64_t b) {
      if ((a >> 32) != (b >> 32)) return (a >> 32) < (b >> 32);
      const auto ra = static_cast<uint32_t>(a), rb = static_cast<uint32_t>(b);
      const uint64_t* oa = order.data() + size_t{member[ra]} * kOrderKeys;
      const uint64_t* ob = order.data() + size_t{member[rb]} * kOrderKeys;
      for (uint32_t q = 0; q < kOrderKeys; ++q) {
        if (oa[q] != ob[q]) return oa[q] < ob[q];
      }
      return ra < rb;
    });
    std::vector<uint64_t> chain;
    for (size_t x = 1; x < items.size(); ++x) {
      for (size_t d = 1; d <= options.chain_window && d <= x; ++d) {
        if ((items[x] >> 32) != (items[x - d] >> 32)) break;
        const auto a = static_cast<uint32_t>(items[x - d]);
        const auto b = static_cast<uint32_t>(items[x]);
        chain.push_back(PackPair(std::min(a, b), std::max(a, b)));
      }
    }
    SortUnique(&chain);
    st.chain_pairs = chain.size();
    MergeInto(&pairs, chain, &tmp);
  }
  for (size_t r = 0; r < n; ++r) st.records_without_informative += informative[r] == 0;
  st.unique_pairs = pairs.size();
  if (stats != nullptr) *stats = st;
  return pairs;
}

}  // namespace prefsift::sketch
