// Checks of the bounded-memory external sort behind `flyby import --sort`
// (engine/records/tag_sorter.h): the merged output equals std::stable_sort of the input (the
// C++ standard library's stable sort as the reference), ties keep their input order across
// runs, the spill file is removed, and an unsorted text import through many runs gives the same
// record as one in-memory run.
#include <catch2/catch.hpp>

#include <algorithm>
#include <fstream>

#include "engine/common/random.h"
#include "engine/records/record_reader.h"
#include "engine/records/tag_import.h"
#include "engine/records/tag_sorter.h"
#include "tests/support/scratch_dir.h"
#include "tests/support/test_seed.h"

using namespace flyby::records;

namespace {

// Random tags with many equal times (times drawn from a small range) so that stability matters.
std::vector<std::pair<std::int64_t, ChannelId>> random_tags(std::size_t n, const char* name) {
  auto rng = flyby::make_stream(flyby::test::seed(name), flyby::StreamPurpose::kTest, 0);
  std::vector<std::pair<std::int64_t, ChannelId>> v(n);
  for (auto& [t, c] : v) {
    t = static_cast<std::int64_t>(rng() % 20000) - 10000;
    c = static_cast<ChannelId>(rng() % 7);
  }
  return v;
}

}  // namespace

TEST_CASE("tag sorter: external merge equals a stable sort, spill file removed", "[records][sort]") {
  flyby::test::ScratchDir dir("tag_sorter");
  const auto input = random_tags(100'000, "tag sorter");
  auto expect = input;
  std::stable_sort(expect.begin(), expect.end(), [](const auto& a, const auto& b) { return a.first < b.first; });
  for (std::size_t run : {std::size_t{2}, std::size_t{999}, std::size_t{1} << 20}) {
    TagSorter s(dir / "out.h5", run);
    for (const auto& [t, c] : input) s.add(t, c);
    std::vector<std::pair<std::int64_t, ChannelId>> got;
    s.finish([&](const TagBlock& b) {
      REQUIRE(b.size() <= 65536);
      for (std::size_t i = 0; i < b.size(); ++i) got.emplace_back(b.time_ps[i], b.channel[i]);
    });
    INFO("run size " << run);
    CHECK(s.runs() == (run >= input.size() ? 0 : (input.size() + run - 1) / run));
    CHECK(got == expect);
    CHECK(dir.entries().empty());
  }
}

TEST_CASE("import --sort through many spilled runs equals the in-memory sort", "[records][sort]") {
  flyby::test::ScratchDir dir("import_sort");
  const auto tags = random_tags(20'000, "import sort");
  {
    std::ofstream f(dir / "in.csv");
    f << "time_ps,channel\n";
    for (const auto& [t, c] : tags) f << t << ",ch" << int(c) << "\n";
  }
  TextImportOptions o;
  o.common.sort = true;
  o.common.sort_run_tags = 1000;
  const auto many = import_text_file(dir / "in.csv", dir / "many.h5", o);
  CHECK(many.sort_runs == 20);
  CHECK_FALSE(many.was_sorted);
  o.common.sort_run_tags = 1 << 20;
  const auto one = import_text_file(dir / "in.csv", dir / "one.h5", o);
  CHECK(one.sort_runs == 0);
  const auto a = read_record(dir / "many.h5"), b = read_record(dir / "one.h5");
  REQUIRE(a.tags.size() == tags.size());
  CHECK(a.tags.time_ps == b.tags.time_ps);
  CHECK(a.tags.channel == b.tags.channel);
  CHECK(std::is_sorted(a.tags.time_ps.begin(), a.tags.time_ps.end()));
  CHECK(dir.entries() == std::vector<std::string>{"in.csv", "many.h5", "one.h5"});
}
