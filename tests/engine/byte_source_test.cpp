// ByteSource: the content of plain, gzip and zstd files, told apart by their first bytes; the
// observer sees the file exactly as stored; pipes and FIFOs read like files; errors name the
// file and the stored offset. The compressed files are written here through zlib's deflate and
// libzstd's compression API, so the test knows each file's content and stored bytes.

#include <gtest/gtest.h>

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <zlib.h>
#include <zstd.h>

#include <csignal>
#include <cstdint>
#include <filesystem>
#include <sstream>
#include <stdexcept>
#include <string>
#include <thread>
#include <vector>

#include "stepledger/engine/byte_source.h"
#include "stepledger/engine/errors.h"
#include "support/input_error.h"
#include "support/test_paths.h"
#include "support/test_random.h"

namespace stepledger {
namespace {

// Invented CSV text of about `rows` lines, random enough that its compressed form spans
// several of the source's input blocks.
std::string MakeContent(std::uint64_t seed, int rows) {
  testing::TestRandom random(seed);
  std::ostringstream text;
  text << "listing_id,age_months,memory_gb,price\n";
  for (int i = 0; i < rows; ++i) {
    text << "L" << i << "," << random.Uniform(0, 60) << "," << 4 * (1 + static_cast<int>(random.Uniform(0, 8)))
         << "," << random.Uniform(80, 1400) << "\n";
  }
  return text.str();
}

std::string Gzip(const std::string& content, int level = 6) {
  z_stream stream{};
  // 16 + MAX_WBITS: a gzip wrapper (RFC 1952), as gzip(1) writes.
  EXPECT_EQ(deflateInit2(&stream, level, Z_DEFLATED, 16 + MAX_WBITS, 8, Z_DEFAULT_STRATEGY), Z_OK);
  std::string stored(deflateBound(&stream, static_cast<uLong>(content.size())), '\0');
  stream.next_in = reinterpret_cast<Bytef*>(const_cast<char*>(content.data()));
  stream.avail_in = static_cast<uInt>(content.size());
  stream.next_out = reinterpret_cast<Bytef*>(stored.data());
  stream.avail_out = static_cast<uInt>(stored.size());
  EXPECT_EQ(deflate(&stream, Z_FINISH), Z_STREAM_END);
  stored.resize(stream.total_out);
  deflateEnd(&stream);
  return stored;
}

// One zstd frame; with_checksum adds the frame's content checksum (so that a flipped byte is
// always caught, even one that still decodes).
std::string Zstd(const std::string& content, bool with_checksum = false) {
  ZSTD_CCtx* context = ZSTD_createCCtx();
  ZSTD_CCtx_setParameter(context, ZSTD_c_compressionLevel, 3);
  ZSTD_CCtx_setParameter(context, ZSTD_c_checksumFlag, with_checksum ? 1 : 0);
  std::string stored(ZSTD_compressBound(content.size()), '\0');
  const std::size_t size = ZSTD_compress2(context, stored.data(), stored.size(), content.data(), content.size());
  ZSTD_freeCCtx(context);
  EXPECT_FALSE(ZSTD_isError(size)) << ZSTD_getErrorName(size);
  stored.resize(size);
  return stored;
}

// Everything a source gives, read with a buffer of `capacity` bytes; the observer's bytes too.
struct Drained {
  std::string content;
  std::string observed;
};
Drained Drain(ByteSource& source, std::size_t capacity = 4096) {
  Drained drained;
  source.SetStoredByteObserver([&](std::string_view bytes) { drained.observed.append(bytes); });
  std::vector<char> buffer(capacity);
  for (;;) {
    const std::size_t got = source.Read(buffer.data(), buffer.size());
    if (got == 0) break;
    drained.content.append(buffer.data(), got);
  }
  return drained;
}

class ByteSourceFiles : public ::testing::Test {
 protected:
  testing::TempDir scratch_;
};

TEST_F(ByteSourceFiles, PlainFileGivesItsBytesAndSaysPlain) {
  const std::string content = MakeContent(1, 20000);
  const auto path = scratch_.Write("rows.csv", content);
  ByteSource source(path);
  EXPECT_EQ(source.encoding(), "plain");
  const Drained drained = Drain(source);
  EXPECT_EQ(drained.content, content);
  EXPECT_EQ(drained.observed, content);
  EXPECT_EQ(source.stored_bytes(), content.size());
  EXPECT_EQ(source.content_bytes(), content.size());
  EXPECT_EQ(source.Read(nullptr, 0), 0u);
}

TEST_F(ByteSourceFiles, GzipFileDecompressesAndTheObserverSeesTheStoredBytes) {
  const std::string content = MakeContent(2, 60000);
  const std::string stored = Gzip(content);
  ASSERT_GT(stored.size(), ByteSource::kInputBlockBytes) << "the file should span several input blocks";
  const auto path = scratch_.Write("rows.csv.gz", stored);
  for (const std::size_t capacity : {std::size_t{1} << 16, std::size_t{7}}) {
    ByteSource source(path);
    EXPECT_EQ(source.encoding(), "gzip");
    const Drained drained = Drain(source, capacity);
    EXPECT_EQ(drained.content, content) << "capacity " << capacity;
    EXPECT_EQ(drained.observed, stored);
    EXPECT_EQ(source.stored_bytes(), stored.size());
    EXPECT_EQ(source.content_bytes(), content.size());
  }
}

TEST_F(ByteSourceFiles, TwoMemberGzipReadsBothMembersInOrder) {
  const std::string first = MakeContent(3, 3000), second = MakeContent(4, 5000);
  const std::string stored = Gzip(first) + Gzip(second, 1);
  ByteSource source(scratch_.Write("two.csv.gz", stored));
  const Drained drained = Drain(source);
  EXPECT_EQ(drained.content, first + second);
  EXPECT_EQ(drained.observed, stored);
}

TEST_F(ByteSourceFiles, ZstdFileDecompresses) {
  const std::string content = MakeContent(5, 60000);
  const std::string stored = Zstd(content);
  const auto path = scratch_.Write("rows.csv.zst", stored);
  for (const std::size_t capacity : {std::size_t{1} << 16, std::size_t{5}}) {
    ByteSource source(path);
    EXPECT_EQ(source.encoding(), "zstd");
    const Drained drained = Drain(source, capacity);
    EXPECT_EQ(drained.content, content) << "capacity " << capacity;
    EXPECT_EQ(drained.observed, stored);
    EXPECT_EQ(source.stored_bytes(), stored.size());
  }
}

TEST_F(ByteSourceFiles, TwoFrameZstdReadsBothFramesInOrder) {
  const std::string first = MakeContent(6, 3000), second = MakeContent(7, 4000);
  const std::string stored = Zstd(first) + Zstd(second, true);
  ByteSource source(scratch_.Write("two.csv.zst", stored));
  const Drained drained = Drain(source);
  EXPECT_EQ(drained.content, first + second);
  EXPECT_EQ(drained.observed, stored);
}

TEST_F(ByteSourceFiles, CompressedEmptyContentIsEmpty) {
  ByteSource gzip(scratch_.Write("empty.csv.gz", Gzip("")));
  EXPECT_EQ(gzip.encoding(), "gzip");
  EXPECT_EQ(Drain(gzip).content, "");
  ByteSource zstd(scratch_.Write("empty.csv.zst", Zstd("")));
  EXPECT_EQ(zstd.encoding(), "zstd");
  EXPECT_EQ(Drain(zstd).content, "");
}

TEST_F(ByteSourceFiles, EmptyFileIsPlainAndEndsAtOnce) {
  ByteSource source(scratch_.Write("empty.csv", ""));
  EXPECT_EQ(source.encoding(), "plain");
  const Drained drained = Drain(source);
  EXPECT_EQ(drained.content, "");
  EXPECT_EQ(drained.observed, "");
  EXPECT_EQ(source.stored_bytes(), 0u);
}

TEST_F(ByteSourceFiles, FilesShorterThanAMagicAreReadAsTheyAre) {
  for (const std::string content : {"a", "y\n", "\x28\xb5\x2f"}) {
    ByteSource source(scratch_.Write("short.csv", content));
    EXPECT_EQ(source.encoding(), "plain") << content;
    EXPECT_EQ(Drain(source).content, content);
  }
}

// ---- errors --------------------------------------------------------------------------------------

TEST_F(ByteSourceFiles, TruncatedGzipNamesTheFileAndWhereItEnds) {
  const std::string stored = Gzip(MakeContent(8, 20000));
  const std::string cut = stored.substr(0, stored.size() / 2);
  const auto path = scratch_.Write("cut.csv.gz", cut);
  const std::string message = testing::InputErrorOf([&] {
    ByteSource source(path);
    Drain(source);
  });
  EXPECT_EQ(message, path.string() + ": truncated gzip stream: the file ends at stored byte " +
                         std::to_string(cut.size()) + " inside a member");
}

TEST_F(ByteSourceFiles, GzipCutInsideItsTrailerIsTruncated) {
  const std::string stored = Gzip("a,b\n1,2\n");
  const auto path = scratch_.Write("cut.csv.gz", stored.substr(0, stored.size() - 3));
  const std::string message = testing::InputErrorOf([&] {
    ByteSource source(path);
    Drain(source);
  });
  EXPECT_NE(message.find(path.string() + ": truncated gzip stream"), std::string::npos) << message;
}

TEST_F(ByteSourceFiles, TruncatedZstdNamesTheFileAndWhereItEnds) {
  const std::string stored = Zstd(MakeContent(9, 20000));
  const std::string cut = stored.substr(0, stored.size() - 10);
  const auto path = scratch_.Write("cut.csv.zst", cut);
  const std::string message = testing::InputErrorOf([&] {
    ByteSource source(path);
    Drain(source);
  });
  EXPECT_EQ(message, path.string() + ": truncated zstd stream: the file ends at stored byte " +
                         std::to_string(cut.size()) + " inside a frame");
}

TEST_F(ByteSourceFiles, CorruptGzipNamesTheFileAndAStoredOffset) {
  std::string stored = Gzip(MakeContent(10, 20000));
  // Flip bytes in the middle of the deflate data: a bad code, a bad distance or, at the
  // latest, the member's CRC-32 catches it.
  for (std::size_t i = stored.size() / 2; i < stored.size() / 2 + 16; ++i) stored[i] = static_cast<char>(~stored[i]);
  const auto path = scratch_.Write("bad.csv.gz", stored);
  const std::string message = testing::InputErrorOf([&] {
    ByteSource source(path);
    Drain(source);
  });
  EXPECT_EQ(message.rfind(path.string() + ": corrupt gzip stream at stored byte ", 0), 0u) << message;
}

TEST_F(ByteSourceFiles, CorruptZstdNamesTheFileAndAStoredOffset) {
  std::string stored = Zstd(MakeContent(11, 20000), true);
  for (std::size_t i = stored.size() / 2; i < stored.size() / 2 + 16; ++i) stored[i] = static_cast<char>(~stored[i]);
  const auto path = scratch_.Write("bad.csv.zst", stored);
  const std::string message = testing::InputErrorOf([&] {
    ByteSource source(path);
    Drain(source);
  });
  EXPECT_EQ(message.rfind(path.string() + ": corrupt zstd stream at stored byte ", 0), 0u) << message;
}

TEST_F(ByteSourceFiles, BytesAfterTheLastGzipMemberAreAnError) {
  const std::string member = Gzip("a,b\n1,2\n");
  const auto path = scratch_.Write("tail.csv.gz", member + "not gzip");
  const std::string message = testing::InputErrorOf([&] {
    ByteSource source(path);
    Drain(source);
  });
  // The offset is where the stray bytes begin (or a little after: zlib reads the header first).
  EXPECT_EQ(message.rfind(path.string() + ": corrupt gzip stream at stored byte ", 0), 0u) << message;
}

TEST_F(ByteSourceFiles, UnreadableFilesNameThePath) {
  const auto missing = scratch_.path() / "no-such.csv.gz";
  EXPECT_EQ(testing::InputErrorOf([&] { ByteSource source(missing); }),
            missing.string() + ": cannot open: No such file or directory");
  // A folder opens but cannot be read.
  const std::string message = testing::InputErrorOf([&] { ByteSource source(scratch_.path()); });
  EXPECT_EQ(message, scratch_.path().string() + ": cannot read at stored byte 0: Is a directory");
}

TEST_F(ByteSourceFiles, ObserverSetAfterTheFirstReadIsAProgrammingError) {
  ByteSource source(scratch_.Write("rows.csv", "a\n1\n"));
  char byte = 0;
  ASSERT_EQ(source.Read(&byte, 1), 1u);
  EXPECT_THROW(source.SetStoredByteObserver([](std::string_view) {}), std::logic_error);
}

// ---- pipes ------------------------------------------------------------------------------------

// Writes bytes to fd in small pieces, then closes it (so the reader sees the end). A reader
// that stops early makes write(2) fail with EPIPE instead of killing the test with SIGPIPE.
void Feed(int fd, const std::string& bytes) {
  std::signal(SIGPIPE, SIG_IGN);
  std::size_t written = 0;
  while (written < bytes.size()) {
    const std::size_t piece = std::min<std::size_t>(1000, bytes.size() - written);
    const ssize_t got = ::write(fd, bytes.data() + written, piece);
    if (got <= 0) break;
    written += static_cast<std::size_t>(got);
  }
  ::close(fd);
}

TEST_F(ByteSourceFiles, FifoFedByAThreadReadsLikeAFile) {
  const std::string content = MakeContent(12, 30000);
  const std::string stored = Gzip(content);
  const auto fifo = scratch_.path() / "rows.fifo";
  ASSERT_EQ(::mkfifo(fifo.c_str(), 0600), 0);
  // open(2) of a FIFO blocks until both ends are open: the writer opens in its thread.
  std::thread writer([&] {
    const int fd = ::open(fifo.c_str(), O_WRONLY | O_CLOEXEC);
    if (fd >= 0) Feed(fd, stored);
  });
  Drained drained;
  try {
    ByteSource source(fifo);
    EXPECT_EQ(source.encoding(), "gzip");
    drained = Drain(source);
  } catch (...) {
    writer.join();
    throw;
  }
  writer.join();
  EXPECT_EQ(drained.content, content);
  EXPECT_EQ(drained.observed, stored);
}

TEST_F(ByteSourceFiles, OpenPipeDescriptorReadsZstd) {
  const std::string content = MakeContent(13, 30000);
  const std::string stored = Zstd(content) + Zstd(content);
  int ends[2];
  ASSERT_EQ(::pipe(ends), 0);
  std::thread writer([&] { Feed(ends[1], stored); });
  Drained drained;
  {
    ByteSource source(ends[0], "<stdin>", /*close_when_done=*/true);
    EXPECT_EQ(source.path(), "<stdin>");
    drained = Drain(source);
  }
  writer.join();
  EXPECT_EQ(drained.content, content + content);
  EXPECT_EQ(drained.observed, stored);
  // The source closed its end.
  EXPECT_EQ(::fcntl(ends[0], F_GETFD), -1);
}

TEST_F(ByteSourceFiles, PipeCutShortIsTruncated) {
  const std::string stored = Zstd(MakeContent(14, 5000));
  int ends[2];
  ASSERT_EQ(::pipe(ends), 0);
  std::thread writer([&] { Feed(ends[1], stored.substr(0, stored.size() / 3)); });
  const std::string message = testing::InputErrorOf([&] {
    ByteSource source(ends[0], "<stdin>", true);
    Drain(source);
  });
  writer.join();
  EXPECT_EQ(message.rfind("<stdin>: truncated zstd stream", 0), 0u) << message;
}

}  // namespace
}  // namespace stepledger
