// Per-process scratch paths for the fuzz targets: the readers under test work on files, so each
// input is written to (or produced in) a private temporary directory.
#pragma once

#include <unistd.h>

#include <filesystem>
#include <fstream>
#include <string>

namespace flyby::fuzz {

inline const std::filesystem::path& scratch_dir() {
  static const std::filesystem::path dir = [] {
    auto d = std::filesystem::temp_directory_path() / ("flyby-fuzz-" + std::to_string(::getpid()));
    std::filesystem::create_directories(d);
    return d;
  }();
  return dir;
}

inline std::filesystem::path write_input(const char* name, const unsigned char* data, std::size_t size) {
  const auto p = scratch_dir() / name;
  std::ofstream f(p, std::ios::binary | std::ios::trunc);
  f.write(reinterpret_cast<const char*>(data), static_cast<std::streamsize>(size));
  return p;
}

}  // namespace flyby::fuzz
