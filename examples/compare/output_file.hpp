/// @file
/// An output file that appears only when complete: written under a temporary name in the same
/// directory and renamed by commit(); removed by the destructor if never committed (an error, an
/// exception), so no partial file is left behind.
#pragma once

#include <unistd.h>

#include <cstdio>
#include <fstream>
#include <stdexcept>
#include <string>
#include <utility>

namespace rowfold_compare {

class OutputFile {
 public:
  explicit OutputFile(std::string path) : m_path(std::move(path)) {
    const std::size_t slash = m_path.find_last_of('/');
    const std::string dir = slash == std::string::npos ? std::string() : m_path.substr(0, slash + 1);
    const std::string base = slash == std::string::npos ? m_path : m_path.substr(slash + 1);
    m_temp = dir + "." + base + ".partial-" + std::to_string(static_cast<long>(::getpid()));
    m_out.open(m_temp, std::ios::out | std::ios::trunc | std::ios::binary);
    if (!m_out) throw std::runtime_error("cannot write " + m_path + " (could not create " + m_temp + ")");
  }
  OutputFile(const OutputFile&) = delete;
  OutputFile& operator=(const OutputFile&) = delete;
  ~OutputFile() {
    if (!m_committed) {
      m_out.close();
      std::remove(m_temp.c_str());
    }
  }

  std::ostream& stream() { return m_out; }
  const std::string& path() const { return m_path; }

  /// Flushes, closes and renames the file to its final name; throws when any write failed.
  void commit() {
    m_out.flush();
    const bool good = static_cast<bool>(m_out);
    m_out.close();
    if (!good || m_out.fail()) throw std::runtime_error("writing " + m_path + " failed");
    if (std::rename(m_temp.c_str(), m_path.c_str()) != 0)
      throw std::runtime_error("cannot rename " + m_temp + " to " + m_path);
    m_committed = true;
  }

 private:
  std::string m_path;
  std::string m_temp;
  std::ofstream m_out;
  bool m_committed = false;
};

}  // namespace rowfold_compare
