// Small RAII and typed-attribute helpers over the HDF5 C API, shared by the record reader and
// writer. Readers get an explicit type check (class, size, sign) before every read, so a file
// with a wrong type is reported instead of silently converted.
#pragma once

#include <hdf5.h>

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

namespace flyby::records::h5 {

// Owns one HDF5 identifier and closes it with the matching H5*close.
class Handle {
 public:
  Handle() = default;
  explicit Handle(hid_t id) : id_(id) {}
  ~Handle() { reset(); }
  Handle(Handle&& o) noexcept : id_(o.id_) { o.id_ = H5I_INVALID_HID; }
  Handle& operator=(Handle&& o) noexcept {
    if (this != &o) {
      reset();
      id_ = o.id_;
      o.id_ = H5I_INVALID_HID;
    }
    return *this;
  }
  Handle(const Handle&) = delete;
  Handle& operator=(const Handle&) = delete;
  hid_t get() const { return id_; }
  bool valid() const { return id_ >= 0; }
  void reset();
  // Gives up ownership without closing (after an explicit, checked H5Fclose).
  hid_t release() {
    const hid_t id = id_;
    id_ = H5I_INVALID_HID;
    return id;
  }

 private:
  hid_t id_ = H5I_INVALID_HID;
};

// The type a reader requires of an attribute or dataset.
enum class Kind { kInt64, kUint64, kUint32, kUint8, kFloat64, kString };
const char* kind_name(Kind kind);

// Empty if `type` (a datatype id) has the required kind, else what it is instead
// (e.g. "a 4-byte signed integer").
std::optional<std::string> type_mismatch(hid_t type, Kind want);

// ---- writing (throw IoError on an HDF5 failure) ----
void write_attr(hid_t loc, const char* name, const std::string& value);
void write_attr(hid_t loc, const char* name, std::int64_t value);
void write_attr(hid_t loc, const char* name, std::uint64_t value);
void write_attr(hid_t loc, const char* name, std::uint32_t value);
void write_attr(hid_t loc, const char* name, std::uint8_t value);
void write_attr(hid_t loc, const char* name, double value);
Handle create_group(hid_t loc, const char* name);
// A 1-D contiguous dataset holding `values`.
void write_dataset(hid_t loc, const char* name, const std::vector<std::int64_t>& values);
void write_dataset(hid_t loc, const char* name, const std::vector<std::uint64_t>& values);
void write_dataset(hid_t loc, const char* name, const std::vector<std::uint8_t>& values);
void write_dataset(hid_t loc, const char* name, const std::vector<std::string>& values);

// ---- reading: a problem is returned as a one-line message (the caller adds the file name) ----
struct ReadError {
  std::string message;
};
// Attribute `name` on `loc`: nullopt if absent; throws ReadError if present with a wrong type,
// shape or unreadable value.
std::optional<std::string> read_attr_string(hid_t loc, const char* name, const std::string& where);
std::optional<std::int64_t> read_attr_i64(hid_t loc, const char* name, const std::string& where);
std::optional<std::uint64_t> read_attr_u64(hid_t loc, const char* name, const std::string& where);
std::optional<std::uint32_t> read_attr_u32(hid_t loc, const char* name, const std::string& where);
std::optional<std::uint8_t> read_attr_u8(hid_t loc, const char* name, const std::string& where);
std::optional<double> read_attr_f64(hid_t loc, const char* name, const std::string& where);

// Opens 1-D dataset `path` and checks its type; returns (dataset, extent). ReadError if absent,
// not 1-D or of the wrong type.
std::pair<Handle, std::uint64_t> open_dataset_1d(hid_t file, const char* path, Kind kind);
// Reads elements [first, first + count) of a 1-D dataset of the given kind into `out`.
void read_slab(hid_t dset, Kind kind, std::uint64_t first, std::uint64_t count, void* out,
               const char* path);
// Whole small 1-D datasets (channel table, index); `max_len` bounds the extent.
std::vector<std::string> read_strings(hid_t file, const char* path, std::uint64_t max_len);

// True if an object (group or dataset) exists at `path` (each path component is checked).
bool exists(hid_t file, const char* path);

}  // namespace flyby::records::h5
