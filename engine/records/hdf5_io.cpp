// Implementation of the HDF5 helpers. Every call that can fail is checked; writing failures are
// IoError (disk full, permissions), reading failures ReadError (turned into InputError by the
// reader with the file name in front).
#include "engine/records/hdf5_io.h"

#include <cstring>
#include <memory>

#include "engine/common/errors.h"

namespace flyby::records::h5 {
namespace {

// Longest string attribute accepted (the config text of a scenario is a few KiB).
constexpr std::size_t kMaxStringBytes = std::size_t{64} << 20;

void check_w(herr_t rc, const char* what, const char* name) {
  if (rc < 0) throw IoError(std::string("HDF5 write failed: ") + what + " '" + name + "'");
}
hid_t check_w(hid_t id, const char* what, const char* name) {
  if (id < 0) throw IoError(std::string("HDF5 write failed: ") + what + " '" + name + "'");
  return id;
}

[[noreturn]] void fail(const std::string& msg) { throw ReadError{msg}; }

Handle string_type() {
  Handle t(H5Tcopy(H5T_C_S1));
  if (!t.valid() || H5Tset_size(t.get(), H5T_VARIABLE) < 0 || H5Tset_cset(t.get(), H5T_CSET_UTF8) < 0) {
    throw IoError("HDF5: cannot make a string type");
  }
  return t;
}

void write_scalar_attr(hid_t loc, const char* name, hid_t file_type, hid_t mem_type, const void* value) {
  if (H5Aexists(loc, name) > 0) check_w(H5Adelete(loc, name), "delete attribute", name);
  Handle space(check_w(H5Screate(H5S_SCALAR), "dataspace for", name));
  Handle attr(check_w(H5Acreate2(loc, name, file_type, space.get(), H5P_DEFAULT, H5P_DEFAULT),
                      "create attribute", name));
  check_w(H5Awrite(attr.get(), mem_type, value), "write attribute", name);
}

template <class T>
void write_dataset_num(hid_t loc, const char* name, hid_t file_type, hid_t mem_type, const std::vector<T>& v) {
  const hsize_t n = v.size();
  Handle space(check_w(H5Screate_simple(1, &n, nullptr), "dataspace for", name));
  Handle dset(check_w(H5Dcreate2(loc, name, file_type, space.get(), H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT),
                      "create dataset", name));
  if (n > 0) check_w(H5Dwrite(dset.get(), mem_type, H5S_ALL, H5S_ALL, H5P_DEFAULT, v.data()), "write dataset", name);
}

// Checks an attribute's dataspace holds exactly one element (scalar or 1-element 1-D).
void check_single(hid_t attr, const std::string& where) {
  Handle space(H5Aget_space(attr));
  if (!space.valid()) fail(where + ": unreadable dataspace");
  const hssize_t n = H5Sget_simple_extent_npoints(space.get());
  if (n != 1) fail(where + ": expected a single value, found " + std::to_string(n));
}

// An attribute that exists, opened, with its type checked against `kind` and its shape checked to
// be a single value; `where` names it in error messages. nullopt when the attribute is absent.
struct CheckedAttr {
  Handle attr;
  Handle type;
  std::string where;
};

std::optional<CheckedAttr> open_checked_attr(hid_t loc, const char* name, const std::string& where, Kind kind) {
  const htri_t ex = H5Aexists(loc, name);
  if (ex < 0) fail(where + ": cannot query attribute '" + name + "'");
  if (ex == 0) return std::nullopt;
  CheckedAttr a{Handle(H5Aopen(loc, name, H5P_DEFAULT)), Handle(), where + " attribute '" + name + "'"};
  if (!a.attr.valid()) fail(a.where + ": cannot open");
  a.type = Handle(H5Aget_type(a.attr.get()));
  if (!a.type.valid()) fail(a.where + ": unreadable type");
  if (auto m = type_mismatch(a.type.get(), kind)) fail(a.where + " must be " + kind_name(kind) + ", found " + *m);
  check_single(a.attr.get(), a.where);
  return a;
}

template <class T>
std::optional<T> read_attr_num(hid_t loc, const char* name, const std::string& where, Kind kind, hid_t mem_type) {
  auto a = open_checked_attr(loc, name, where, kind);
  if (!a) return std::nullopt;
  T value{};
  if (H5Aread(a->attr.get(), mem_type, &value) < 0) fail(a->where + ": cannot read value");
  return value;
}

}  // namespace

void Handle::reset() {
  if (id_ < 0) return;
  switch (H5Iget_type(id_)) {
    case H5I_FILE: H5Fclose(id_); break;
    case H5I_GROUP: H5Gclose(id_); break;
    case H5I_DATASET: H5Dclose(id_); break;
    case H5I_DATASPACE: H5Sclose(id_); break;
    case H5I_DATATYPE: H5Tclose(id_); break;
    case H5I_ATTR: H5Aclose(id_); break;
    case H5I_GENPROP_LST: H5Pclose(id_); break;
    default: break;
  }
  id_ = H5I_INVALID_HID;
}

const char* kind_name(Kind kind) {
  switch (kind) {
    case Kind::kInt64: return "a 64-bit signed integer";
    case Kind::kUint64: return "a 64-bit unsigned integer";
    case Kind::kUint32: return "a 32-bit unsigned integer";
    case Kind::kUint8: return "an 8-bit unsigned integer";
    case Kind::kFloat64: return "a 64-bit float";
    case Kind::kString: return "a string";
  }
  return "?";
}

std::optional<std::string> type_mismatch(hid_t type, Kind want) {
  const H5T_class_t cls = H5Tget_class(type);
  const std::size_t size = H5Tget_size(type);
  std::string have;
  if (cls == H5T_INTEGER) {
    const H5T_sign_t sign = H5Tget_sign(type);
    const bool is_signed = sign == H5T_SGN_2;
    const H5T_order_t order = H5Tget_order(type);
    const bool ok_order = order == H5T_ORDER_LE || order == H5T_ORDER_BE || order == H5T_ORDER_NONE;
    if (ok_order && ((want == Kind::kInt64 && is_signed && size == 8) ||
                     (want == Kind::kUint64 && !is_signed && size == 8) ||
                     (want == Kind::kUint32 && !is_signed && size == 4) ||
                     (want == Kind::kUint8 && !is_signed && size == 1))) {
      return std::nullopt;
    }
    have = "a " + std::to_string(size * 8) + "-bit " + (is_signed ? "signed" : "unsigned") + " integer";
  } else if (cls == H5T_FLOAT) {
    if (want == Kind::kFloat64 && size == 8) return std::nullopt;
    have = "a " + std::to_string(size * 8) + "-bit float";
  } else if (cls == H5T_STRING) {
    if (want == Kind::kString) return std::nullopt;
    have = "a string";
  } else if (cls == H5T_COMPOUND) {
    have = "a compound type";
  } else if (cls == H5T_ARRAY) {
    have = "an array type";
  } else {
    have = "an unsupported type (class " + std::to_string(static_cast<int>(cls)) + ")";
  }
  return have;
}

void write_attr(hid_t loc, const char* name, const std::string& value) {
  Handle t = string_type();
  const char* p = value.c_str();
  write_scalar_attr(loc, name, t.get(), t.get(), &p);
}
void write_attr(hid_t loc, const char* name, std::int64_t value) {
  write_scalar_attr(loc, name, H5T_STD_I64LE, H5T_NATIVE_INT64, &value);
}
void write_attr(hid_t loc, const char* name, std::uint64_t value) {
  write_scalar_attr(loc, name, H5T_STD_U64LE, H5T_NATIVE_UINT64, &value);
}
void write_attr(hid_t loc, const char* name, std::uint32_t value) {
  write_scalar_attr(loc, name, H5T_STD_U32LE, H5T_NATIVE_UINT32, &value);
}
void write_attr(hid_t loc, const char* name, std::uint8_t value) {
  write_scalar_attr(loc, name, H5T_STD_U8LE, H5T_NATIVE_UINT8, &value);
}
void write_attr(hid_t loc, const char* name, double value) {
  write_scalar_attr(loc, name, H5T_IEEE_F64LE, H5T_NATIVE_DOUBLE, &value);
}

Handle create_group(hid_t loc, const char* name) {
  return Handle(check_w(H5Gcreate2(loc, name, H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT), "create group", name));
}

void write_dataset(hid_t loc, const char* name, const std::vector<std::int64_t>& v) {
  write_dataset_num(loc, name, H5T_STD_I64LE, H5T_NATIVE_INT64, v);
}
void write_dataset(hid_t loc, const char* name, const std::vector<std::uint64_t>& v) {
  write_dataset_num(loc, name, H5T_STD_U64LE, H5T_NATIVE_UINT64, v);
}
void write_dataset(hid_t loc, const char* name, const std::vector<std::uint8_t>& v) {
  write_dataset_num(loc, name, H5T_STD_U8LE, H5T_NATIVE_UINT8, v);
}
void write_dataset(hid_t loc, const char* name, const std::vector<std::string>& v) {
  Handle t = string_type();
  std::vector<const char*> ptrs;
  ptrs.reserve(v.size());
  for (const auto& s : v) ptrs.push_back(s.c_str());
  const hsize_t n = v.size();
  Handle space(check_w(H5Screate_simple(1, &n, nullptr), "dataspace for", name));
  Handle dset(check_w(H5Dcreate2(loc, name, t.get(), space.get(), H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT),
                      "create dataset", name));
  if (n > 0) check_w(H5Dwrite(dset.get(), t.get(), H5S_ALL, H5S_ALL, H5P_DEFAULT, ptrs.data()), "write dataset", name);
}

std::optional<std::string> read_attr_string(hid_t loc, const char* name, const std::string& where) {
  auto a = open_checked_attr(loc, name, where, Kind::kString);
  if (!a) return std::nullopt;
  const Handle& attr = a->attr;
  const Handle& type = a->type;
  const std::string& w = a->where;
  const htri_t vlen = H5Tis_variable_str(type.get());
  if (vlen < 0) fail(w + ": unreadable string type");
  if (vlen > 0) {
    Handle mem = string_type();
    char* p = nullptr;
    if (H5Aread(attr.get(), mem.get(), &p) < 0) fail(w + ": cannot read value");
    std::string s;
    if (p != nullptr) {
      const std::size_t len = strnlen(p, kMaxStringBytes + 1);
      if (len > kMaxStringBytes) {
        H5free_memory(p);
        fail(w + ": longer than 64 MiB");
      }
      s.assign(p, len);
      H5free_memory(p);
    }
    return s;
  }
  const std::size_t size = H5Tget_size(type.get());
  if (size == 0 || size > kMaxStringBytes) fail(w + ": implausible fixed string size " + std::to_string(size));
  std::vector<char> buf(size + 1, '\0');
  Handle mem(H5Tcopy(H5T_C_S1));
  H5Tset_size(mem.get(), size);
  if (H5Aread(attr.get(), mem.get(), buf.data()) < 0) fail(w + ": cannot read value");
  return std::string(buf.data(), strnlen(buf.data(), size));
}

std::optional<std::int64_t> read_attr_i64(hid_t loc, const char* name, const std::string& where) {
  return read_attr_num<std::int64_t>(loc, name, where, Kind::kInt64, H5T_NATIVE_INT64);
}
std::optional<std::uint64_t> read_attr_u64(hid_t loc, const char* name, const std::string& where) {
  return read_attr_num<std::uint64_t>(loc, name, where, Kind::kUint64, H5T_NATIVE_UINT64);
}
std::optional<std::uint32_t> read_attr_u32(hid_t loc, const char* name, const std::string& where) {
  return read_attr_num<std::uint32_t>(loc, name, where, Kind::kUint32, H5T_NATIVE_UINT32);
}
std::optional<std::uint8_t> read_attr_u8(hid_t loc, const char* name, const std::string& where) {
  return read_attr_num<std::uint8_t>(loc, name, where, Kind::kUint8, H5T_NATIVE_UINT8);
}
std::optional<double> read_attr_f64(hid_t loc, const char* name, const std::string& where) {
  return read_attr_num<double>(loc, name, where, Kind::kFloat64, H5T_NATIVE_DOUBLE);
}

bool exists(hid_t file, const char* path) {
  // H5Lexists fails on a missing intermediate group, so walk the components.
  std::string p(path);
  std::size_t pos = 0;
  while (true) {
    pos = p.find('/', pos + 1);
    const std::string prefix = p.substr(0, pos);
    if (prefix.empty() || prefix == "/") {
      if (pos == std::string::npos) return true;
      continue;
    }
    if (H5Lexists(file, prefix.c_str(), H5P_DEFAULT) <= 0) return false;
    if (H5Oexists_by_name(file, prefix.c_str(), H5P_DEFAULT) <= 0) return false;
    if (pos == std::string::npos) return true;
  }
}

std::pair<Handle, std::uint64_t> open_dataset_1d(hid_t file, const char* path, Kind kind) {
  const std::string w = std::string("dataset ") + path;
  if (!exists(file, path)) fail(w + " is missing");
  H5O_info_t info{};
  if (H5Oget_info_by_name(file, path, &info, H5P_DEFAULT) < 0) fail(w + ": unreadable object header");
  if (info.type != H5O_TYPE_DATASET) fail(std::string(path) + " is not a dataset");
  Handle dset(H5Dopen2(file, path, H5P_DEFAULT));
  if (!dset.valid()) fail(w + ": cannot open");
  Handle type(H5Dget_type(dset.get()));
  if (!type.valid()) fail(w + ": unreadable type");
  if (auto m = type_mismatch(type.get(), kind)) fail(w + " must be " + kind_name(kind) + ", found " + *m);
  Handle space(H5Dget_space(dset.get()));
  if (!space.valid()) fail(w + ": unreadable dataspace");
  const int rank = H5Sget_simple_extent_ndims(space.get());
  if (rank != 1) fail(w + " must be 1-dimensional, found rank " + std::to_string(rank));
  hsize_t n = 0;
  if (H5Sget_simple_extent_dims(space.get(), &n, nullptr) < 0) fail(w + ": unreadable extent");
  return {std::move(dset), static_cast<std::uint64_t>(n)};
}

void read_slab(hid_t dset, Kind kind, std::uint64_t first, std::uint64_t count, void* out, const char* path) {
  if (count == 0) return;
  hid_t mem_type = H5T_NATIVE_INT64;
  switch (kind) {
    case Kind::kInt64: mem_type = H5T_NATIVE_INT64; break;
    case Kind::kUint64: mem_type = H5T_NATIVE_UINT64; break;
    case Kind::kUint32: mem_type = H5T_NATIVE_UINT32; break;
    case Kind::kUint8: mem_type = H5T_NATIVE_UINT8; break;
    case Kind::kFloat64: mem_type = H5T_NATIVE_DOUBLE; break;
    case Kind::kString: fail("internal: read_slab on strings");
  }
  const std::string w = std::string("dataset ") + path;
  Handle fspace(H5Dget_space(dset));
  if (!fspace.valid()) fail(w + ": unreadable dataspace");
  const hsize_t start = first, cnt = count;
  if (H5Sselect_hyperslab(fspace.get(), H5S_SELECT_SET, &start, nullptr, &cnt, nullptr) < 0) {
    fail(w + ": cannot select elements " + std::to_string(first) + ".." + std::to_string(first + count));
  }
  Handle mspace(H5Screate_simple(1, &cnt, nullptr));
  if (H5Dread(dset, mem_type, mspace.get(), fspace.get(), H5P_DEFAULT, out) < 0) {
    fail(w + ": cannot read elements " + std::to_string(first) + ".." + std::to_string(first + count - 1) +
         " (file truncated or corrupt)");
  }
}

std::vector<std::string> read_strings(hid_t file, const char* path, std::uint64_t max_len) {
  auto [dset, n] = open_dataset_1d(file, path, Kind::kString);
  const std::string w = std::string("dataset ") + path;
  if (n > max_len) fail(w + " has " + std::to_string(n) + " entries, at most " + std::to_string(max_len) + " allowed");
  std::vector<std::string> out;
  if (n == 0) return out;
  Handle type(H5Dget_type(dset.get()));
  const htri_t vlen = H5Tis_variable_str(type.get());
  if (vlen < 0) fail(w + ": unreadable string type");
  if (vlen > 0) {
    Handle mem = string_type();
    std::vector<char*> ptrs(n, nullptr);
    if (H5Dread(dset.get(), mem.get(), H5S_ALL, H5S_ALL, H5P_DEFAULT, ptrs.data()) < 0) {
      fail(w + ": cannot read (file truncated or corrupt)");
    }
    bool too_long = false;
    for (char* p : ptrs) {
      if (p == nullptr) {
        out.emplace_back();
        continue;
      }
      const std::size_t len = strnlen(p, kMaxStringBytes + 1);
      if (len > kMaxStringBytes) too_long = true;
      out.emplace_back(p, std::min(len, kMaxStringBytes));
    }
    Handle space(H5Dget_space(dset.get()));
    H5Dvlen_reclaim(mem.get(), space.get(), H5P_DEFAULT, ptrs.data());
    if (too_long) fail(w + ": an entry is longer than 64 MiB");
    return out;
  }
  const std::size_t size = H5Tget_size(type.get());
  if (size == 0 || size > 65536) fail(w + ": implausible fixed string size " + std::to_string(size));
  std::vector<char> buf(size * n + 1, '\0');
  Handle mem(H5Tcopy(H5T_C_S1));
  H5Tset_size(mem.get(), size);
  if (H5Dread(dset.get(), mem.get(), H5S_ALL, H5S_ALL, H5P_DEFAULT, buf.data()) < 0) {
    fail(w + ": cannot read (file truncated or corrupt)");
  }
  for (std::uint64_t i = 0; i < n; ++i) {
    const char* p = buf.data() + i * size;
    out.emplace_back(p, strnlen(p, size));
  }
  return out;
}

}  // namespace flyby::records::h5
