// The bad-input corpus (tests/bad_input/, format in its README): every case runs the built
// executable in a fresh folder and checks the exact exit status, the message's substrings (file,
// line, column or JSON key), that stderr is printable text, that the run ended within its time,
// and that no file in the folder was created, changed or removed unless the case allows it.
// The executable runs as a child process, so a crash or a hang fails one case, not the suite.

#include <fcntl.h>
#include <pwd.h>
#include <signal.h>
#include <sys/resource.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <unistd.h>

#include <algorithm>
#include <chrono>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <map>
#include <sstream>
#include <string>
#include <thread>
#include <vector>

#include <gtest/gtest.h>
#include <nlohmann/json.hpp>

#include "support/test_paths.h"

namespace stepledger {
namespace {

namespace fs = std::filesystem;
using nlohmann::json;

fs::path CorpusDir() { return testing::SourceDir() / "tests" / "bad_input"; }

std::vector<std::string> CaseNames() {
  std::vector<std::string> names;
  for (const auto& entry : fs::recursive_directory_iterator(CorpusDir())) {
    if (entry.is_regular_file() && entry.path().extension() == ".json") {
      names.push_back(fs::relative(entry.path(), CorpusDir()).replace_extension().string());
    }
  }
  std::sort(names.begin(), names.end());
  return names;
}

std::string ReadWhole(const fs::path& path) {
  std::ifstream in(path, std::ios::binary);
  std::ostringstream text;
  text << in.rdbuf();
  return text.str();
}

std::string FromHex(const std::string& hex) {
  std::string bytes;
  std::string digits;
  for (char c : hex) {
    if (std::isxdigit(static_cast<unsigned char>(c))) digits += c;
  }
  if (digits.size() % 2 != 0) throw std::runtime_error("odd number of hex digits: " + hex);
  for (std::size_t i = 0; i < digits.size(); i += 2) {
    bytes += static_cast<char>(std::stoi(digits.substr(i, 2), nullptr, 16));
  }
  return bytes;
}

// A file's content: a string verbatim, a JSON object or array written compactly under "json",
// or a list of pieces {"text": ..., "times": n} / {"hex": "ff fe"} / {"json": value}.
std::string Content(const json& spec) {
  if (spec.is_string()) return spec.get<std::string>();
  if (spec.is_object() && spec.contains("json")) return spec["json"].dump();
  if (!spec.is_array()) throw std::runtime_error("a file is a string, {\"json\": ...} or a list of pieces");
  std::string text;
  for (const auto& piece : spec) {
    std::string one;
    if (piece.contains("text")) one = piece["text"].get<std::string>();
    else if (piece.contains("hex")) one = FromHex(piece["hex"].get<std::string>());
    else if (piece.contains("json")) one = piece["json"].dump();
    else if (piece.contains("source")) {
      one = ReadWhole(testing::SourceDir() / piece["source"].get<std::string>());
      if (piece.contains("lines")) {  // only the first lines of the file
        std::size_t end = 0;
        for (std::size_t line = 0; line < piece["lines"].get<std::size_t>() && end != std::string::npos; ++line) {
          end = one.find('\n', end);
          if (end != std::string::npos) ++end;
        }
        if (end != std::string::npos) one.resize(end);
      }
    }
    else throw std::runtime_error("a piece needs text, hex, json or source");
    const std::size_t times = piece.value("times", std::size_t{1});
    text.reserve(text.size() + one.size() * times);
    for (std::size_t i = 0; i < times; ++i) text += one;
  }
  return text;
}

// Every regular file and folder under root, with the content of the files.
std::map<std::string, std::string> Snapshot(const fs::path& root) {
  std::map<std::string, std::string> entries;
  for (auto it = fs::recursive_directory_iterator(root, fs::directory_options::skip_permission_denied);
       it != fs::recursive_directory_iterator(); ++it) {
    const std::string name = fs::relative(it->path(), root).string();
    if (it->is_symlink()) entries[name] = "symlink:" + fs::read_symlink(it->path()).string();
    else if (it->is_directory()) entries[name] = "folder";
    else if (it->is_regular_file()) entries[name] = "file:" + ReadWhole(it->path());
    else entries[name] = "special";
  }
  return entries;
}

struct Outcome {
  int status = -1;       // exit status, or -1 when killed by a signal
  int signal = 0;        // the signal that ended it, if any
  bool timed_out = false;
  std::string out, err;
};

// Runs the executable with args in folder, with the limits of spec, capturing both streams.
// stdin_text, when given, arrives through a pipe (so /dev/stdin is a pipe, as in `cat x | stepledger`).
Outcome RunChild(const std::vector<std::string>& args, const fs::path& folder, const std::string* stdin_text,
                 const fs::path& out_path, const fs::path& err_path, const json& spec) {
  const long file_size_limit_kb = spec.value("file_size_limit_kb", 0L);
  const long address_space_mb = spec.value("address_space_mb", 0L);
  const bool as_nobody = spec.value("run_as_nobody", false);
  const double timeout_seconds = spec.value("timeout_seconds", 60.0);
  std::vector<std::string> argv_text = {testing::StepledgerBinary().string()};
  argv_text.insert(argv_text.end(), args.begin(), args.end());
  std::vector<char*> argv;
  for (auto& a : argv_text) argv.push_back(a.data());
  argv.push_back(nullptr);
  uid_t nobody_uid = 65534;
  gid_t nobody_gid = 65534;
  if (const passwd* nobody = getpwnam("nobody")) {
    nobody_uid = nobody->pw_uid;
    nobody_gid = nobody->pw_gid;
  }

  int pipe_ends[2] = {-1, -1};
  if (stdin_text && pipe(pipe_ends) != 0) throw std::runtime_error("pipe failed");
  const pid_t child = fork();
  if (child == 0) {
    setpgid(0, 0);
    if (chdir(folder.c_str()) != 0) _exit(120);
    if (stdin_text) close(pipe_ends[1]);
    const int in = stdin_text ? pipe_ends[0] : open("/dev/null", O_RDONLY);
    const int out = open(out_path.c_str(), O_WRONLY | O_CREAT | O_TRUNC, 0666);
    const int err = open(err_path.c_str(), O_WRONLY | O_CREAT | O_TRUNC, 0666);
    if (in < 0 || out < 0 || err < 0) _exit(121);
    dup2(in, 0);
    dup2(out, 1);
    dup2(err, 2);
    if (file_size_limit_kb > 0) {
      signal(SIGXFSZ, SIG_IGN);  // a write past the limit fails with EFBIG, as on a full disk
      rlimit limit{static_cast<rlim_t>(file_size_limit_kb) * 1024, static_cast<rlim_t>(file_size_limit_kb) * 1024};
      setrlimit(RLIMIT_FSIZE, &limit);
    }
    if (address_space_mb > 0) {
      rlimit limit{static_cast<rlim_t>(address_space_mb) << 20, static_cast<rlim_t>(address_space_mb) << 20};
      setrlimit(RLIMIT_AS, &limit);
    }
    if (as_nobody && getuid() == 0) {
      if (setgid(nobody_gid) != 0 || setuid(nobody_uid) != 0) _exit(122);
    }
    execv(argv[0], argv.data());
    _exit(123);
  }
  std::thread feeder;
  if (stdin_text) {
    close(pipe_ends[0]);
    feeder = std::thread([write_end = pipe_ends[1], stdin_text] {
      signal(SIGPIPE, SIG_IGN);  // the program may stop reading early
      std::size_t done = 0;
      while (done < stdin_text->size()) {
        const ssize_t wrote = write(write_end, stdin_text->data() + done, stdin_text->size() - done);
        if (wrote <= 0) break;
        done += static_cast<std::size_t>(wrote);
      }
      close(write_end);
    });
  }
  Outcome outcome;
  const auto deadline = std::chrono::steady_clock::now() + std::chrono::duration<double>(timeout_seconds);
  int wait_status = 0;
  while (true) {
    const pid_t done = waitpid(child, &wait_status, WNOHANG);
    if (done == child) break;
    if (std::chrono::steady_clock::now() > deadline) {
      outcome.timed_out = true;
      kill(-child, SIGKILL);
      waitpid(child, &wait_status, 0);
      break;
    }
    std::this_thread::sleep_for(std::chrono::milliseconds(10));
  }
  if (feeder.joinable()) feeder.join();
  if (WIFEXITED(wait_status)) outcome.status = WEXITSTATUS(wait_status);
  if (WIFSIGNALED(wait_status)) outcome.signal = WTERMSIG(wait_status);
  outcome.out = ReadWhole(out_path);
  outcome.err = ReadWhole(err_path);
  return outcome;
}

// stderr must be text a terminal shows as it is: valid UTF-8, no control characters but newline
// and tab (data and plan values are escaped before they are printed).
std::string PrintableProblem(const std::string& text) {
  for (std::size_t i = 0; i < text.size();) {
    const auto c = static_cast<unsigned char>(text[i]);
    if (c < 0x80) {
      if ((c < 0x20 && c != '\n' && c != '\t') || c == 0x7f) return "control byte " + std::to_string(c) + " at " + std::to_string(i);
      ++i;
      continue;
    }
    const int length = c >= 0xF0 && c <= 0xF4 ? 4 : c >= 0xE0 ? 3 : c >= 0xC2 && c <= 0xDF ? 2 : 0;
    if (length == 0 || (c >= 0xE0 && c <= 0xEF && length != 3)) return "invalid UTF-8 at byte " + std::to_string(i);
    if (i + length > text.size()) return "truncated UTF-8 at byte " + std::to_string(i);
    for (int k = 1; k < length; ++k) {
      if ((static_cast<unsigned char>(text[i + k]) & 0xC0) != 0x80) return "invalid UTF-8 at byte " + std::to_string(i);
    }
    i += length;
  }
  return "";
}

// scripts/sanitize.sh builds the tests and the program with AddressSanitizer (GCC says so with
// __SANITIZE_ADDRESS__, Clang with __has_feature).
#if defined(__SANITIZE_ADDRESS__)
constexpr bool kUnderAddressSanitizer = true;
#elif defined(__has_feature)
#if __has_feature(address_sanitizer)
constexpr bool kUnderAddressSanitizer = true;
#else
constexpr bool kUnderAddressSanitizer = false;
#endif
#else
constexpr bool kUnderAddressSanitizer = false;
#endif

class BadInputCorpus : public ::testing::TestWithParam<std::string> {};

TEST_P(BadInputCorpus, EndsWithTheStatedExitAndMessageAndLeavesFilesAlone) {
  const fs::path case_path = CorpusDir() / (GetParam() + ".json");
  json spec;
  {
    std::ifstream in(case_path);
    ASSERT_TRUE(in) << case_path;
    spec = json::parse(in);
  }
  ASSERT_TRUE(spec.contains("about") && spec.contains("args") && spec.contains("exit"))
      << case_path << ": a case needs about, args and exit";
  if (kUnderAddressSanitizer && spec.value("address_space_mb", 0L) > 0) {
    GTEST_SKIP() << "address_space_mb under AddressSanitizer: its shadow memory reserves terabytes of "
                    "address space at start-up, so no program starts under RLIMIT_AS; the plain build "
                    "(scripts/test.sh) runs this case";
  }

  testing::TempDir scratch;  // holds the case folder and the captured streams
  const fs::path folder = scratch.path() / "work";
  fs::create_directories(folder);
  for (const auto& name : spec.value("folders", json::array())) fs::create_directories(folder / name.get<std::string>());
  // Named copies: items() of a temporary would dangle.
  const json files = spec.value("files", json::object());
  const json copies = spec.value("copy", json::object());
  for (const auto& [name, content] : files.items()) {
    fs::create_directories((folder / name).parent_path());
    std::ofstream(folder / name, std::ios::binary) << Content(content);
  }
  for (const auto& [name, source] : copies.items()) {
    fs::create_directories((folder / name).parent_path());
    fs::copy_file(testing::SourceDir() / source.get<std::string>(), folder / name, fs::copy_options::overwrite_existing);
  }
  const std::string stdin_text = spec.contains("stdin") ? Content(spec["stdin"]) : std::string();
  const fs::path out_path = scratch.path() / "stdout";
  const fs::path err_path = scratch.path() / "stderr";
  // Earlier successful runs, e.g. the audit a failed --force must leave as it was.
  for (const auto& before : spec.value("before", json::array())) {
    const Outcome setup = RunChild(before.get<std::vector<std::string>>(), folder, nullptr, out_path, err_path, json::object());
    ASSERT_EQ(setup.status, 0) << "set-up run failed: " << before.dump() << "\n" << setup.err;
  }
  if (spec.value("run_as_nobody", false)) {
    // The unprivileged user must reach the folder and read its inputs.
    fs::permissions(scratch.path(), fs::perms::others_exec | fs::perms::others_read, fs::perm_options::add);
    for (const auto& entry : fs::recursive_directory_iterator(folder)) {
      fs::permissions(entry.path(), fs::perms::others_read | (entry.is_directory() ? fs::perms::others_exec : fs::perms::none),
                      fs::perm_options::add);
    }
    fs::permissions(folder, fs::perms::others_exec | fs::perms::others_read, fs::perm_options::add);
  }
  for (const auto& name : spec.value("read_only", json::array())) {
    fs::permissions(folder / name.get<std::string>(), fs::perms::owner_write | fs::perms::group_write | fs::perms::others_write,
                    fs::perm_options::remove);
  }
  for (const auto& name : spec.value("unreadable", json::array())) {
    fs::permissions(folder / name.get<std::string>(), fs::perms::none, fs::perm_options::replace);
  }
  const auto before = Snapshot(folder);

  const Outcome outcome = RunChild(spec["args"].get<std::vector<std::string>>(), folder, spec.contains("stdin") ? &stdin_text : nullptr,
                                   out_path, err_path, spec);
  const std::string shown = "\n--- case " + GetParam() + ": " + spec["about"].get<std::string>() + "\n--- stderr:\n" +
                            outcome.err.substr(0, 4000) + "\n--- stdout:\n" + outcome.out.substr(0, 2000);

  ASSERT_FALSE(outcome.timed_out) << "did not end within " << spec.value("timeout_seconds", 60.0) << " s" << shown;
  ASSERT_EQ(outcome.signal, 0) << "ended by signal " << outcome.signal << shown;
  EXPECT_EQ(outcome.status, spec["exit"].get<int>()) << shown;
  for (const auto& part : spec.value("stderr", json::array())) {
    EXPECT_NE(outcome.err.find(part.get<std::string>()), std::string::npos) << "stderr lacks: " << part.get<std::string>() << shown;
  }
  for (const auto& part : spec.value("stderr_lacks", json::array())) {
    EXPECT_EQ(outcome.err.find(part.get<std::string>()), std::string::npos) << "stderr has: " << part.get<std::string>() << shown;
  }
  for (const auto& part : spec.value("stdout", json::array())) {
    EXPECT_NE(outcome.out.find(part.get<std::string>()), std::string::npos) << "stdout lacks: " << part.get<std::string>() << shown;
  }
  if (spec["exit"].get<int>() != 3) {
    EXPECT_EQ(outcome.err.find("internal error"), std::string::npos) << "bad input reported as a bug" << shown;
  }
  if (spec.contains("stderr_lines")) {
    EXPECT_EQ(static_cast<int>(std::count(outcome.err.begin(), outcome.err.end(), '\n')), spec["stderr_lines"].get<int>()) << shown;
  }
  EXPECT_EQ(PrintableProblem(outcome.err), "") << "stderr is not printable text" << shown;

  if (spec.value("run_as_nobody", false) || spec.contains("read_only") || spec.contains("unreadable")) {
    for (const auto& entry : fs::recursive_directory_iterator(folder)) {
      fs::permissions(entry.path(), fs::perms::owner_all, fs::perm_options::add);
    }
  }
  auto after = Snapshot(folder);
  for (const auto& allowed : spec.value("may_write", json::array())) after.erase(allowed.get<std::string>());
  auto expected = before;
  for (const auto& allowed : spec.value("may_write", json::array())) expected.erase(allowed.get<std::string>());
  for (const auto& [name, content] : expected) {
    const auto found = after.find(name);
    if (found == after.end()) ADD_FAILURE() << "removed: " << name << shown;
    else if (found->second != content) ADD_FAILURE() << "changed: " << name << shown;
  }
  for (const auto& [name, content] : after) {
    if (!expected.count(name)) ADD_FAILURE() << "created: " << name << shown;
  }
}

std::string CaseTestName(const ::testing::TestParamInfo<std::string>& info) {
  std::string name = info.param;
  for (char& c : name) {
    if (!std::isalnum(static_cast<unsigned char>(c))) c = '_';
  }
  return name;
}

INSTANTIATE_TEST_SUITE_P(Corpus, BadInputCorpus, ::testing::ValuesIn(CaseNames()), CaseTestName);

TEST(BadInputCorpusFormat, EveryCaseFileIsAValidCase) {
  // A case with a misspelt key would silently check less: only the documented keys are allowed.
  const std::vector<std::string> keys = {"about", "args", "exit", "files", "copy", "folders", "stdin", "before",
                                         "read_only", "unreadable", "run_as_nobody", "file_size_limit_kb", "address_space_mb",
                                         "timeout_seconds", "stderr", "stderr_lacks", "stdout", "stderr_lines",
                                         "may_write", "item"};
  const auto names = CaseNames();
  ASSERT_GE(names.size(), 1u);
  for (const auto& name : names) {
    std::ifstream in(CorpusDir() / (name + ".json"));
    const json spec = json::parse(in);
    for (const auto& [key, value] : spec.items()) {
      EXPECT_NE(std::find(keys.begin(), keys.end(), key), keys.end()) << name << ": unknown key " << key;
    }
    EXPECT_TRUE(spec.contains("stderr") || spec["exit"] == 0) << name << ": a failing case names its message";
  }
}

}  // namespace
}  // namespace stepledger
