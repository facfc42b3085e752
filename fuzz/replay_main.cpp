// A main for the fuzz targets without libFuzzer, so that any compiler (GCC too) builds them
// and ctest replays the seed corpus and the regression inputs (fuzz/CMakeLists.txt):
//   fuzz_replay_<target> FILE_OR_FOLDER...
// runs the target once on every file (a folder's files in name order), naming each first, so a
// finding (an abort with "fuzz finding: ..." or a sanitizer report) names the input.

#include <algorithm>
#include <cstdint>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <iterator>
#include <string>
#include <vector>

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size);
extern "C" __attribute__((weak)) int LLVMFuzzerInitialize(int* argc, char*** argv);

int main(int argc, char** argv) {
  if (argc < 2) {
    std::fprintf(stderr, "usage: %s FILE_OR_FOLDER...\n", argv[0]);
    return 2;
  }
  if (LLVMFuzzerInitialize != nullptr) LLVMFuzzerInitialize(&argc, &argv);
  std::vector<std::filesystem::path> inputs;
  for (int i = 1; i < argc; ++i) {
    const std::filesystem::path argument = argv[i];
    if (std::filesystem::is_directory(argument)) {
      std::vector<std::filesystem::path> files;
      for (const auto& entry : std::filesystem::directory_iterator(argument)) {
        if (entry.is_regular_file() && entry.path().filename().string().front() != '.') files.push_back(entry.path());
      }
      std::sort(files.begin(), files.end());
      inputs.insert(inputs.end(), files.begin(), files.end());
    } else if (std::filesystem::is_regular_file(argument)) {
      inputs.push_back(argument);
    } else if (!std::filesystem::exists(argument)) {
      // A target without regressions has no fuzz/regressions/<target>/ folder yet.
      std::fprintf(stderr, "%s: not there, nothing to replay\n", argument.c_str());
    } else {
      std::fprintf(stderr, "%s: not a file or a folder\n", argument.c_str());
      return 2;
    }
  }
  for (const std::filesystem::path& input : inputs) {
    std::ifstream in(input, std::ios::binary);
    const std::string bytes((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
    if (!in.eof() && in.fail()) {
      std::fprintf(stderr, "%s: cannot read\n", input.c_str());
      return 2;
    }
    std::fprintf(stderr, "replaying %s (%zu bytes)\n", input.c_str(), bytes.size());
    LLVMFuzzerTestOneInput(reinterpret_cast<const std::uint8_t*>(bytes.data()), bytes.size());
  }
  std::fprintf(stderr, "%zu inputs replayed without a finding\n", inputs.size());
  return 0;
}
