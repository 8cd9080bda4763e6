// Fuzz target for the record validation layer: the input bytes drive the construction of an
// HDF5 file with the documented layout (written with the HDF5 C API, so the HDF5 container is
// always well formed) where every attribute and dataset may be missing, mistyped, resized or
// hold arbitrary values. The reader must accept only files whose tags satisfy the invariants,
// and reject the rest with flyby::InputError. This covers our checks independently of how
// robust the HDF5 library's own parser is against corrupt containers.
#include <fuzzer/FuzzedDataProvider.h>
#include <hdf5.h>

#include <array>
#include <cstdlib>
#include <string>
#include <vector>

#include "engine/common/errors.h"
#include "engine/records/record_reader.h"
#include "tools/fuzz/fuzz_scratch.h"

namespace {

// 0 = omit, 1 = intended type, 2.. = a wrong type.
enum Choice { kOmit, kRight, kI32, kF64, kStr, kU8 };

Choice choose(FuzzedDataProvider& fdp) {
  const int v = fdp.ConsumeIntegralInRange<int>(0, 15);
  if (v == 0) return kOmit;
  if (v >= 5) return kRight;
  return static_cast<Choice>(v + 1);
}

hid_t type_for(Choice c, hid_t right) {
  switch (c) {
    case kI32: return H5T_STD_I32LE;
    case kF64: return H5T_IEEE_F64LE;
    case kU8: return H5T_STD_U8LE;
    default: return right;
  }
}

void attr_num(hid_t loc, const char* name, hid_t right, FuzzedDataProvider& fdp, std::int64_t sensible) {
  const Choice c = choose(fdp);
  if (c == kOmit) return;
  hid_t s = H5Screate(H5S_SCALAR);
  if (c == kStr) {
    hid_t t = H5Tcopy(H5T_C_S1);
    H5Tset_size(t, H5T_VARIABLE);
    const std::string v = fdp.ConsumeRandomLengthString(16);
    const char* p = v.c_str();
    hid_t a = H5Acreate2(loc, name, t, s, H5P_DEFAULT, H5P_DEFAULT);
    H5Awrite(a, t, &p);
    H5Aclose(a);
    H5Tclose(t);
  } else {
    const std::int64_t v = fdp.ConsumeBool() ? sensible : fdp.ConsumeIntegral<std::int64_t>();
    hid_t a = H5Acreate2(loc, name, type_for(c, right), s, H5P_DEFAULT, H5P_DEFAULT);
    if (H5Tget_class(type_for(c, right)) == H5T_FLOAT) {
      const double d = fdp.ConsumeBool() ? static_cast<double>(v) : fdp.ConsumeFloatingPoint<double>();
      H5Awrite(a, H5T_NATIVE_DOUBLE, &d);
    } else {
      H5Awrite(a, H5T_NATIVE_INT64, &v);
    }
    H5Aclose(a);
  }
  H5Sclose(s);
}

void attr_str(hid_t loc, const char* name, FuzzedDataProvider& fdp, const std::string& sensible) {
  const Choice c = choose(fdp);
  if (c == kOmit) return;
  hid_t s = H5Screate(H5S_SCALAR);
  if (c == kRight || c == kStr) {
    const bool fixed = fdp.ConsumeBool();
    const std::string v = fdp.ConsumeBool() ? sensible : fdp.ConsumeRandomLengthString(32);
    hid_t t = H5Tcopy(H5T_C_S1);
    if (fixed) H5Tset_size(t, v.size() + 1);
    else H5Tset_size(t, H5T_VARIABLE);
    hid_t a = H5Acreate2(loc, name, t, s, H5P_DEFAULT, H5P_DEFAULT);
    if (fixed) {
      H5Awrite(a, t, v.c_str());
    } else {
      const char* p = v.c_str();
      H5Awrite(a, t, &p);
    }
    H5Aclose(a);
    H5Tclose(t);
  } else {
    const std::int32_t v = fdp.ConsumeIntegral<std::int32_t>();
    hid_t a = H5Acreate2(loc, name, H5T_STD_I32LE, s, H5P_DEFAULT, H5P_DEFAULT);
    H5Awrite(a, H5T_NATIVE_INT32, &v);
    H5Aclose(a);
  }
  H5Sclose(s);
}

// A 1-D dataset of `values` with the intended or a wrong type (or none).
void dset_num(hid_t loc, const char* name, hid_t right, const std::vector<std::int64_t>& values, FuzzedDataProvider& fdp) {
  const Choice c = choose(fdp);
  if (c == kOmit) return;
  const hsize_t n = values.size();
  hid_t s = H5Screate_simple(1, &n, nullptr);
  hid_t t = c == kStr ? H5T_STD_I16LE : type_for(c, right);
  hid_t d = H5Dcreate2(loc, name, t, s, H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
  if (n > 0) H5Dwrite(d, H5T_NATIVE_INT64, H5S_ALL, H5S_ALL, H5P_DEFAULT, values.data());
  H5Dclose(d);
  H5Sclose(s);
}

void dset_str(hid_t loc, const char* name, const std::vector<std::string>& values, FuzzedDataProvider& fdp) {
  const Choice c = choose(fdp);
  if (c == kOmit) return;
  const hsize_t n = values.size();
  hid_t s = H5Screate_simple(1, &n, nullptr);
  if (c == kRight || c == kStr) {
    hid_t t = H5Tcopy(H5T_C_S1);
    H5Tset_size(t, H5T_VARIABLE);
    std::vector<const char*> p;
    for (const auto& v : values) p.push_back(v.c_str());
    hid_t d = H5Dcreate2(loc, name, t, s, H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
    if (n > 0) H5Dwrite(d, t, H5S_ALL, H5S_ALL, H5P_DEFAULT, p.data());
    H5Dclose(d);
    H5Tclose(t);
  } else {
    hid_t d = H5Dcreate2(loc, name, H5T_STD_I32LE, s, H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
    H5Dclose(d);
  }
  H5Sclose(s);
}

std::size_t jitter_len(std::size_t n, FuzzedDataProvider& fdp) {
  if (fdp.ConsumeIntegralInRange<int>(0, 7) != 0) return n;
  return fdp.ConsumeIntegralInRange<std::size_t>(0, n + 2);
}

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const unsigned char* data, std::size_t size) {
  flyby::records::silence_hdf5_errors();
  FuzzedDataProvider fdp(data, size);
  const auto path = flyby::fuzz::scratch_dir() / "fields.h5";
  hid_t f = H5Fcreate(path.c_str(), H5F_ACC_TRUNC, H5P_DEFAULT, H5P_DEFAULT);
  if (f < 0) std::abort();

  // Tags: mostly sorted with small gaps, sometimes arbitrary.
  const std::size_t n = fdp.ConsumeIntegralInRange<std::size_t>(0, 64);
  const bool sorted = fdp.ConsumeIntegralInRange<int>(0, 7) != 0;
  std::vector<std::int64_t> t, ch;
  std::int64_t now = fdp.ConsumeIntegralInRange<std::int64_t>(-1000, 1000);
  const std::array<std::int64_t, 4> ids = {0, 1, 7, 255};
  for (std::size_t i = 0; i < n; ++i) {
    now += sorted ? fdp.ConsumeIntegralInRange<std::int64_t>(0, 100) : fdp.ConsumeIntegral<std::int16_t>();
    t.push_back(now);
    ch.push_back(fdp.ConsumeIntegralInRange<int>(0, 9) == 0 ? fdp.ConsumeIntegral<std::uint8_t>()
                                                            : ids[fdp.ConsumeIntegralInRange<std::size_t>(0, 3)]);
  }
  const std::int64_t first = n ? t.front() : 0, last = n ? t.back() : 0;

  attr_str(f, "format", fdp, "flyby-time-tags");
  attr_num(f, "format_version", H5T_STD_U32LE, fdp, 1);
  attr_num(f, "complete", H5T_STD_U8LE, fdp, 1);
  attr_num(f, "tag_count", H5T_STD_U64LE, fdp, static_cast<std::int64_t>(n));
  attr_num(f, "resolution_ps", H5T_IEEE_F64LE, fdp, 1);
  attr_num(f, "start_ps", H5T_STD_I64LE, fdp, first);
  attr_num(f, "duration_ps", H5T_STD_I64LE, fdp, last - first + 1);

  hid_t g = H5Gcreate2(f, "tags", H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
  t.resize(jitter_len(n, fdp));
  dset_num(g, "time_ps", H5T_STD_I64LE, t, fdp);
  ch.resize(jitter_len(n, fdp));
  dset_num(g, "channel", H5T_STD_U8LE, ch, fdp);
  H5Gclose(g);

  g = H5Gcreate2(f, "channels", H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
  const std::size_t m = fdp.ConsumeIntegralInRange<std::size_t>(0, 5);
  std::vector<std::int64_t> cid, cnt;
  std::vector<std::string> names, roles;
  const char* name_pool[] = {"A", "B", "sigma+", "bad name", "", "A"};
  const char* role_pool[] = {"detector", "herald", "marker", "photon"};
  for (std::size_t i = 0; i < m; ++i) {
    cid.push_back(fdp.ConsumeBool() ? ids[i % 4] : fdp.ConsumeIntegral<std::uint8_t>());
    names.push_back(name_pool[fdp.ConsumeIntegralInRange<int>(0, 5)]);
    roles.push_back(role_pool[fdp.ConsumeIntegralInRange<int>(0, 3)]);
    std::int64_t c = 0;
    for (auto x : ch) c += x == cid.back();
    cnt.push_back(fdp.ConsumeIntegralInRange<int>(0, 7) ? c : fdp.ConsumeIntegral<std::int64_t>());
  }
  cid.resize(jitter_len(m, fdp));
  dset_num(g, "id", H5T_STD_U8LE, cid, fdp);
  names.resize(jitter_len(m, fdp));
  dset_str(g, "name", names, fdp);
  roles.resize(jitter_len(m, fdp));
  dset_str(g, "role", roles, fdp);
  cnt.resize(jitter_len(m, fdp));
  dset_num(g, "tag_count", H5T_STD_U64LE, cnt, fdp);
  H5Gclose(g);

  g = H5Gcreate2(f, "index", H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
  const std::int64_t b = fdp.ConsumeIntegralInRange<std::int64_t>(0, 8);
  std::vector<std::int64_t> idx;
  for (std::size_t i = 0; b > 0 && i < t.size(); i += static_cast<std::size_t>(b)) {
    idx.push_back(fdp.ConsumeIntegralInRange<int>(0, 15) ? t[i] : fdp.ConsumeIntegral<std::int64_t>());
  }
  idx.resize(jitter_len(idx.size(), fdp));
  dset_num(g, "time_ps", H5T_STD_I64LE, idx, fdp);
  if (H5Lexists(g, "time_ps", H5P_DEFAULT) > 0) {
    hid_t d = H5Dopen2(g, "time_ps", H5P_DEFAULT);
    attr_num(d, "block_tags", H5T_STD_U64LE, fdp, b);
    H5Dclose(d);
  }
  H5Gclose(g);
  if (fdp.ConsumeBool()) {
    g = H5Gcreate2(f, "provenance", H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
    attr_str(g, "command_line", fdp, "flyby simulate");
    attr_num(g, "seed", H5T_STD_U64LE, fdp, 1);
    H5Gclose(g);
  }
  H5Fclose(f);

  try {
    flyby::records::RecordReader r(path);
    flyby::records::TagBlock blk;
    std::int64_t prev = INT64_MIN;
    std::uint64_t seen = 0;
    while (r.read_next(blk, 1 + size % 7)) {
      for (std::size_t i = 0; i < blk.size(); ++i) {
        if (blk.time_ps[i] < prev) std::abort();
        prev = blk.time_ps[i];
        if (!r.header().channel_index(blk.channel[i])) std::abort();
        const auto& h = r.header();
        if (blk.time_ps[i] < h.start_ps || blk.time_ps[i] - h.start_ps >= h.duration_ps) std::abort();
      }
      seen += blk.size();
    }
    if (seen != r.tag_count()) std::abort();
    for (std::int64_t q : {prev, prev - 50, first}) {
      const auto k = r.lower_bound(q);
      if (k > r.tag_count()) std::abort();
    }
  } catch (const flyby::InputError&) {
  }
  return 0;
}
