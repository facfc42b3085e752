#include "stepledger/engine/data_set.h"

#include <sys/stat.h>

#include <algorithm>
#include <cerrno>
#include <cstring>
#include <system_error>

#include "stepledger/engine/column_source.h"
#include "stepledger/engine/errors.h"
#include "stepledger/engine/fingerprint.h"

namespace stepledger {
namespace {

std::string Quoted(const std::filesystem::path& path) { return "'" + path.string() + "'"; }

bool EndsWithNoCase(const std::string& name, std::string_view ending) {
  if (name.size() < ending.size()) return false;
  const std::string_view tail = std::string_view(name).substr(name.size() - ending.size());
  for (std::size_t i = 0; i < ending.size(); ++i) {
    const unsigned char c = static_cast<unsigned char>(tail[i]);
    const char lower = (c >= 'A' && c <= 'Z') ? static_cast<char>(c - 'A' + 'a') : static_cast<char>(c);
    if (lower != ending[i]) return false;
  }
  return true;
}

bool IsDataFileName(const std::string& name) {
  return std::any_of(std::begin(kDataSetFileEndings), std::end(kDataSetFileEndings),
                     [&name](const char* ending) { return EndsWithNoCase(name, ending); });
}

std::string EndingsInWords() {
  std::string words;
  for (std::size_t i = 0; i < std::size(kDataSetFileEndings); ++i) {
    words += (i == 0 ? "" : (i + 1 == std::size(kDataSetFileEndings) ? " or " : ", "));
    words += kDataSetFileEndings[i];
  }
  return words;
}

// stat(2) following links; false with errno set when it fails.
bool StatOf(const std::filesystem::path& path, struct stat& status) { return ::stat(path.c_str(), &status) == 0; }

std::vector<std::filesystem::path> FolderMembers(const std::filesystem::path& folder) {
  std::error_code error;
  std::filesystem::directory_iterator entries(folder, error);
  if (error) throw InputError("cannot list data folder " + Quoted(folder) + ": " + error.message());
  std::vector<std::string> names;
  for (; entries != std::filesystem::directory_iterator(); entries.increment(error)) {
    if (error) break;
    const std::string name = entries->path().filename().string();
    if (name.empty() || name.front() == '.') continue;  // hidden files are not data (see the header)
    struct stat status {};
    const std::filesystem::path path = folder / name;
    if (!StatOf(path, status)) {
      throw InputError("data folder " + Quoted(folder) + " holds " + Quoted(name) + ", which cannot be read: " +
                       std::strerror(errno));
    }
    if (S_ISDIR(status.st_mode)) {
      throw InputError("data folder " + Quoted(folder) + " holds the folder " + Quoted(name) +
                       "; a data folder holds only data files (" + EndingsInWords() +
                       "), and subfolders are not read: move it out");
    }
    if (!IsDataFileName(name)) {
      throw InputError("data folder " + Quoted(folder) + " holds " + Quoted(name) +
                       ", which is not a data file by its name (" + EndingsInWords() +
                       "); a data folder holds only the data: move it out or rename it");
    }
    if (!S_ISREG(status.st_mode)) {
      throw InputError("data folder " + Quoted(folder) + " holds " + Quoted(name) +
                       ", which is not a regular file (a FIFO, socket or device); give it on its own instead");
    }
    names.push_back(name);
  }
  if (error) throw InputError("cannot list data folder " + Quoted(folder) + ": " + error.message());
  if (names.empty()) {
    throw InputError("data folder " + Quoted(folder) + " holds no data file (" + EndingsInWords() + ")");
  }
  // std::string compares with char_traits<char>: byte order, whatever the locale.
  std::sort(names.begin(), names.end());
  std::vector<std::filesystem::path> members;
  members.reserve(names.size());
  for (const std::string& name : names) members.push_back(folder / name);
  return members;
}

std::string JoinShort(const std::vector<std::string>& names) {
  constexpr std::size_t kShown = 3;
  std::string text;
  for (std::size_t i = 0; i < names.size() && i < kShown; ++i) text += (i == 0 ? "" : ", ") + names[i];
  if (names.size() > kShown) text += " and " + std::to_string(names.size() - kShown) + " more";
  return text;
}

}  // namespace

std::vector<std::filesystem::path> DataSetFiles(const DataSet& data) {
  if (data.columns) throw InputError(data.columns->description() + ": data in memory has no files to read");
  if (data.inputs.empty()) throw InputError("no data file given");
  if (data.inputs.size() == 1) {
    const std::filesystem::path& only = data.inputs.front();
    struct stat status {};
    if (StatOf(only, status) && S_ISDIR(status.st_mode)) return FolderMembers(only);
    return {only};  // a file, FIFO or /dev/stdin: opened (and any error named) by the reader
  }
  struct Seen {
    dev_t device;
    ino_t inode;
    std::size_t index;
  };
  std::vector<Seen> seen;
  for (std::size_t i = 0; i < data.inputs.size(); ++i) {
    const std::filesystem::path& input = data.inputs[i];
    const std::string place = " (data file " + std::to_string(i + 1) + " of " + std::to_string(data.inputs.size()) + ")";
    struct stat status {};
    if (!StatOf(input, status)) {
      throw InputError("cannot open data file " + Quoted(input) + place + ": " + std::strerror(errno));
    }
    if (S_ISDIR(status.st_mode)) {
      throw InputError(Quoted(input) + place + " is a folder; give either one folder or data files, not both");
    }
    for (const Seen& before : seen) {
      if (before.device == status.st_dev && before.inode == status.st_ino) {
        throw InputError("data file " + Quoted(input) + place + " is the same file as data file " +
                         std::to_string(before.index + 1) + ", " + Quoted(data.inputs[before.index]) +
                         "; each file of a data set is read once");
      }
    }
    seen.push_back(Seen{status.st_dev, status.st_ino, i});
  }
  return data.inputs;
}

std::string DescribeDataSet(const DataSet& data) {
  if (data.columns) return data.columns->description();
  if (data.inputs.size() == 1) return data.inputs.front().string();
  std::vector<std::string> names;
  names.reserve(data.inputs.size());
  for (const auto& input : data.inputs) names.push_back(input.string());
  return JoinShort(names);
}

std::string DataSetFileName(const DataSet& data) {
  if (data.columns) return data.columns->description();
  auto name_of = [](const std::filesystem::path& path) {
    // "data/" names the folder "data".
    const std::filesystem::path name = path.has_filename() ? path.filename() : path.parent_path().filename();
    return name.string();
  };
  if (data.inputs.size() == 1) return name_of(data.inputs.front());
  std::vector<std::string> names;
  names.reserve(data.inputs.size());
  for (const auto& input : data.inputs) names.push_back(name_of(input));
  return JoinShort(names);
}

std::string CombineMemberFingerprints(const std::vector<std::string>& member_fingerprints) {
  if (member_fingerprints.size() == 1) return member_fingerprints.front();
  std::string material;
  material.reserve(member_fingerprints.size() * 65);
  for (const std::string& fingerprint : member_fingerprints) {
    material += fingerprint;
    material += '\n';
  }
  return ToHex(Sha256(material));
}

std::string RowPlaceText(std::uint64_t line, std::size_t file, const std::vector<std::string>& set_files) {
  std::string text = "line " + std::to_string(line);
  if (!set_files.empty()) text += " of " + (file < set_files.size() ? set_files[file] : "file " + std::to_string(file + 1));
  return text;
}

}  // namespace stepledger
