// WriteFileAtomically and the streaming AtomicFileWriter: the whole content or nothing, never an
// overwrite without permission, no temporary file left behind, and errors that name the path.

#include <gtest/gtest.h>

#include <sys/stat.h>

#include <filesystem>
#include <fstream>
#include <sstream>
#include <stdexcept>
#include <string>

#include "stepledger/io/atomic_file.h"
#include "stepledger/engine/errors.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

std::string ReadText(const std::filesystem::path& path) {
  std::ifstream in(path, std::ios::binary);
  std::ostringstream text;
  text << in.rdbuf();
  return text.str();
}

int FileCount(const std::filesystem::path& folder) {
  int count = 0;
  for ([[maybe_unused]] const auto& entry : std::filesystem::directory_iterator(folder)) ++count;
  return count;
}

TEST(AtomicFile, WritesTheContentAndLeavesNoTemporaryFile) {
  testing::TempDir folder;
  const auto path = folder.path() / "out.json";
  const std::string content = std::string("{\"a\": 1}\n") + std::string(100000, 'x');
  WriteFileAtomically(path, content);
  EXPECT_EQ(ReadText(path), content);
  EXPECT_EQ(FileCount(folder.path()), 1);
}

TEST(AtomicFile, EmptyContentMakesAnEmptyFile) {
  testing::TempDir folder;
  const auto path = folder.path() / "empty.txt";
  WriteFileAtomically(path, "");
  EXPECT_TRUE(std::filesystem::exists(path));
  EXPECT_EQ(std::filesystem::file_size(path), 0u);
}

TEST(AtomicFile, RefusesToOverwriteWithoutPermissionAndNamesThePath) {
  testing::TempDir folder;
  const auto path = folder.Write("audit.json", "original");
  try {
    WriteFileAtomically(path, "replacement");
    FAIL() << "expected InputError";
  } catch (const InputError& error) {
    const std::string message = error.what();
    EXPECT_NE(message.find(path.string()), std::string::npos) << message;
    EXPECT_NE(message.find("--force"), std::string::npos) << message;
  }
  EXPECT_EQ(ReadText(path), "original");
  EXPECT_EQ(FileCount(folder.path()), 1);
}

TEST(AtomicFile, OverwritesWhenAllowed) {
  testing::TempDir folder;
  const auto path = folder.Write("audit.json", "original");
  WriteFileAtomically(path, "replacement", AtomicWriteOptions{.overwrite = true});
  EXPECT_EQ(ReadText(path), "replacement");
  EXPECT_EQ(FileCount(folder.path()), 1);
}

TEST(AtomicFile, MissingFolderNamesThePathAndCreatesNothing) {
  testing::TempDir folder;
  const auto path = folder.path() / "no-such-folder" / "audit.json";
  try {
    WriteFileAtomically(path, "content");
    FAIL() << "expected InputError";
  } catch (const InputError& error) {
    EXPECT_NE(std::string(error.what()).find(path.string()), std::string::npos) << error.what();
  }
  EXPECT_EQ(FileCount(folder.path()), 0);
}

TEST(AtomicFile, RenameOntoAFolderFailsCleanly) {
  // A folder of that name exists: with overwrite the rename fails (EISDIR); the temporary file
  // must be gone and the message must name the path and the system's reason.
  testing::TempDir folder;
  const auto path = folder.path() / "taken";
  std::filesystem::create_directory(path);
  try {
    WriteFileAtomically(path, "content", AtomicWriteOptions{.overwrite = true});
    FAIL() << "expected InputError";
  } catch (const InputError& error) {
    EXPECT_NE(std::string(error.what()).find(path.string()), std::string::npos) << error.what();
  }
  EXPECT_EQ(FileCount(folder.path()), 1);
  EXPECT_TRUE(std::filesystem::is_directory(path));
}

TEST(AtomicFile, PermissionsFollowTheUmask) {
  testing::TempDir folder;
  const auto path = folder.path() / "plan.json";
  const mode_t old_mask = ::umask(022);
  WriteFileAtomically(path, "{}");
  ::umask(old_mask);
  struct stat status {};
  ASSERT_EQ(::stat(path.c_str(), &status), 0);
  EXPECT_EQ(status.st_mode & 0777, 0644u);  // not mkstemp's 0600
}

// --- a file written as it is produced ----------------------------------------------------

TEST(AtomicFileWriter, PiecesOfAnySizeMakeTheWholeFileOnlyAtCommit) {
  testing::TempDir folder;
  const auto path = folder.path() / "priced.csv";
  std::string expected;
  {
    AtomicFileWriter writer(path, {}, /*buffer_bytes=*/64);
    for (int i = 0; i < 2000; ++i) {
      // Pieces smaller than, equal to and larger than the buffer.
      const std::string piece = std::string(static_cast<std::size_t>(i % 150), static_cast<char>('a' + i % 26)) + "\n";
      writer.Write(piece);
      expected += piece;
      if (i == 1000) {
        // Halfway: the final name does not exist yet, only the hidden temporary.
        EXPECT_FALSE(std::filesystem::exists(path));
        EXPECT_EQ(FileCount(folder.path()), 1);
      }
    }
    EXPECT_EQ(writer.bytes_written(), expected.size());
    writer.Commit();
  }
  EXPECT_EQ(ReadText(path), expected);
  EXPECT_EQ(FileCount(folder.path()), 1);
}

TEST(AtomicFileWriter, DestroyedWithoutCommitLeavesNothing) {
  testing::TempDir folder;
  const auto path = folder.path() / "priced.csv";
  {
    AtomicFileWriter writer(path, {}, 16);
    writer.Write(std::string(1000, 'x'));  // past the buffer: on disk in the temporary
    EXPECT_EQ(FileCount(folder.path()), 1);
  }
  EXPECT_EQ(FileCount(folder.path()), 0);
  // With overwrite, an existing file stays as it was.
  const auto existing = folder.Write("old.csv", "previous");
  {
    AtomicFileWriter writer(existing, AtomicWriteOptions{.overwrite = true});
    writer.Write("replacement");
  }
  EXPECT_EQ(ReadText(existing), "previous");
  EXPECT_EQ(FileCount(folder.path()), 1);
}

TEST(AtomicFileWriter, RefusesAClashAtConstructionAndOverwritesWhenAllowed) {
  testing::TempDir folder;
  const auto path = folder.Write("priced.csv", "previous");
  try {
    AtomicFileWriter writer(path);
    FAIL() << "expected InputError";
  } catch (const InputError& error) {
    EXPECT_EQ(std::string(error.what()), path.string() + ": file exists; use --force to overwrite");
  }
  EXPECT_EQ(FileCount(folder.path()), 1);
  AtomicFileWriter writer(path, AtomicWriteOptions{.overwrite = true});
  writer.Write("new");
  writer.Commit();
  EXPECT_EQ(ReadText(path), "new");
  EXPECT_THROW(writer.Write("more"), std::logic_error);
  EXPECT_THROW(writer.Commit(), std::logic_error);
}

TEST(AtomicFileWriter, AFileMadeMeanwhileIsNotClobberedWithoutOverwrite) {
  testing::TempDir folder;
  const auto path = folder.path() / "priced.csv";
  AtomicFileWriter writer(path);
  writer.Write("ours");
  folder.Write("priced.csv", "theirs");  // another writer took the name first
  EXPECT_THROW(writer.Commit(), InputError);
  EXPECT_EQ(ReadText(path), "theirs");
  EXPECT_EQ(FileCount(folder.path()), 1);
}

TEST(AtomicFileWriter, MissingFolderNamesThePath) {
  testing::TempDir folder;
  const auto path = folder.path() / "no-such-folder" / "priced.csv";
  try {
    AtomicFileWriter writer(path);
    FAIL() << "expected InputError";
  } catch (const InputError& error) {
    EXPECT_NE(std::string(error.what()).find(path.string()), std::string::npos) << error.what();
  }
}

// --- an output folder written as one unit ------------------------------------------------

TEST(AtomicFileWriter, PiecesBecomeTheFileOnlyAtCommit) {
  testing::TempDir folder;
  const auto path = folder.path() / "rows.csv";
  std::string expected;
  {
    AtomicFileWriter writer(path);
    for (int i = 0; i < 20000; ++i) {  // more than the 64 KiB buffer, in small and large pieces
      const std::string piece = std::to_string(i) + (i % 1000 == 0 ? std::string(70000, 'y') : "") + "\n";
      writer.Write(piece);
      expected += piece;
    }
    EXPECT_FALSE(std::filesystem::exists(path));  // nothing under the name before Commit
    EXPECT_EQ(FileCount(folder.path()), 1);        // the temporary file beside it
    writer.Commit();
    EXPECT_THROW(writer.Write("late"), std::logic_error);
  }
  EXPECT_EQ(ReadText(path), expected);
  EXPECT_EQ(FileCount(folder.path()), 1);
}

TEST(AtomicFileWriter, DestroyedWithoutCommitLeavesNothingAndKeepsTheOldFile) {
  testing::TempDir folder;
  const auto path = folder.path() / "rows.csv";
  {
    AtomicFileWriter writer(path);
    writer.Write(std::string(200000, 'z'));
  }  // an exception during the pass ends here
  EXPECT_EQ(FileCount(folder.path()), 0);
  WriteFileAtomically(path, "old\n");
  {
    AtomicFileWriter writer(path, AtomicWriteOptions{.overwrite = true});
    writer.Write("new\n");
  }
  EXPECT_EQ(ReadText(path), "old\n");
  EXPECT_EQ(FileCount(folder.path()), 1);
}

TEST(AtomicFileWriter, RefusesAnExistingFileOrMissingFolderBeforeWritingAnything) {
  testing::TempDir folder;
  const auto path = folder.path() / "rows.csv";
  WriteFileAtomically(path, "old\n");
  try {
    AtomicFileWriter writer(path);
    FAIL() << "expected a refusal";
  } catch (const InputError& error) {
    EXPECT_NE(std::string(error.what()).find("rows.csv: file exists; use --force"), std::string::npos) << error.what();
  }
  EXPECT_THROW(AtomicFileWriter(folder.path() / "missing" / "rows.csv"), InputError);
  EXPECT_EQ(FileCount(folder.path()), 1);
  AtomicFileWriter replacing(path, AtomicWriteOptions{.overwrite = true});
  replacing.Write("new\n");
  replacing.Commit();
  EXPECT_EQ(ReadText(path), "new\n");
}

TEST(OutputFolder, WritesEveryFileAndCreatesTheFolder) {
  testing::TempDir parent;
  const auto folder = parent.path() / "out";
  WriteOutputFolder(folder, {{"audit.json", "{}\n"}, {"report.html", "<p>r</p>"}});
  EXPECT_EQ(ReadText(folder / "audit.json"), "{}\n");
  EXPECT_EQ(ReadText(folder / "report.html"), "<p>r</p>");
  EXPECT_EQ(FileCount(folder), 2);
}

TEST(OutputFolder, AClashWithoutForceWritesNothing) {
  testing::TempDir folder;
  folder.Write("report.html", "old report");
  try {
    WriteOutputFolder(folder.path(), {{"audit.json", "new"}, {"report.html", "new"}});
    FAIL() << "expected InputError";
  } catch (const InputError& error) {
    EXPECT_NE(std::string(error.what()).find("report.html"), std::string::npos) << error.what();
  }
  EXPECT_FALSE(std::filesystem::exists(folder.path() / "audit.json"));
  EXPECT_EQ(ReadText(folder.path() / "report.html"), "old report");
  EXPECT_EQ(FileCount(folder.path()), 1);
}

// With --force, a second file that cannot be written (a folder stands at its name) must leave
// the previous first file in place: all new files or the old ones untouched.
TEST(OutputFolder, AFailedSecondFileKeepsThePreviousFirstFile) {
  testing::TempDir folder;
  folder.Write("audit.json", "previous audit");
  std::filesystem::create_directory(folder.path() / "report.html");
  EXPECT_THROW(WriteOutputFolder(folder.path(), {{"audit.json", "new audit"}, {"report.html", "new"}},
                                 AtomicWriteOptions{.overwrite = true}),
               InputError);
  EXPECT_EQ(ReadText(folder.path() / "audit.json"), "previous audit");
  EXPECT_TRUE(std::filesystem::is_directory(folder.path() / "report.html"));
  EXPECT_EQ(FileCount(folder.path()), 2);  // no temporary or backup file left
}

TEST(OutputFolder, OverwritesEveryFileWhenAllowed) {
  testing::TempDir folder;
  folder.Write("audit.json", "previous audit");
  folder.Write("report.html", "previous report");
  WriteOutputFolder(folder.path(), {{"audit.json", "new audit"}, {"report.html", "new report"}},
                    AtomicWriteOptions{.overwrite = true});
  EXPECT_EQ(ReadText(folder.path() / "audit.json"), "new audit");
  EXPECT_EQ(ReadText(folder.path() / "report.html"), "new report");
  EXPECT_EQ(FileCount(folder.path()), 2);
}

TEST(OutputFolder, AFailureRemovesAFolderItCreated) {
  testing::TempDir parent;
  const auto folder = parent.path() / "out";
  // The same name twice: the second is a clash with the first's temporary placement.
  EXPECT_THROW(WriteOutputFolder(folder, {{"a.json", "1"}, {"a.json", "2"}}), InputError);
  EXPECT_FALSE(std::filesystem::exists(folder));
}

}  // namespace
}  // namespace stepledger
