// Tests of the streaming CSV reader and of ClassifyCell. Expected values are written by hand
// from the file texts below (common practice: RFC 4180-style quoting, with the reader's own
// documented choices for BOM, CRLF, trailing empty lines and column numbers).

#include "stepledger/engine/csv.h"

#include <gtest/gtest.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <random>
#include <stdexcept>
#include <string>
#include <vector>

#include "stepledger/engine/errors.h"
#include "stepledger/engine/limits.h"
#include "support/test_paths.h"
#include "support/input_error.h"

namespace stepledger {
namespace {

using testing::TempDir;

// A record copied out of the reader (its views die at the next Next()).
struct OwnedField {
  std::string text;
  std::uint64_t line;
  std::uint64_t column;
  bool quoted;
  bool operator==(const OwnedField&) const = default;
};
struct OwnedRecord {
  std::uint64_t line;
  std::uint64_t row_index;
  std::vector<OwnedField> fields;
  bool operator==(const OwnedRecord&) const = default;
};

std::ostream& operator<<(std::ostream& out, const OwnedRecord& record) {
  out << "{line " << record.line << ", row " << record.row_index << ":";
  for (const OwnedField& field : record.fields) {
    out << " [" << QuoteForMessage(field.text) << "@" << field.line << ":" << field.column
        << (field.quoted ? " q" : "") << "]";
  }
  return out << "}";
}

std::vector<OwnedRecord> ReadAll(CsvReader& reader) {
  std::vector<OwnedRecord> records;
  CsvRecord record;
  while (reader.Next(record)) {
    OwnedRecord& owned = records.emplace_back();
    owned.line = record.line;
    owned.row_index = record.row_index;
    for (const CsvField& field : record.fields) {
      owned.fields.push_back({std::string(field.text), field.line, field.column, field.quoted});
    }
  }
  return records;
}

std::vector<OwnedRecord> ReadAll(const std::filesystem::path& path, CsvOptions options = {}) {
  CsvReader reader(path, std::move(options));
  return ReadAll(reader);
}

using testing::InputErrorOf;
using testing::LimitErrorOf;

std::string ErrorReadingAll(const std::filesystem::path& path, CsvOptions options = {}) {
  return InputErrorOf([&] { ReadAll(path, std::move(options)); });
}

class CsvReaderTest : public ::testing::Test {
 protected:
  TempDir folder_;
};

TEST_F(CsvReaderTest, ReadsHeaderAndRecordsWithPositions) {
  const auto path = folder_.Write("laptops.csv", "model,age_months,price\nA13,24,350.5\nB7,,410\n");
  CsvReader reader(path);
  EXPECT_EQ(reader.header(), (std::vector<std::string>{"model", "age_months", "price"}));
  EXPECT_EQ(reader.ColumnIndex("price"), 2);
  EXPECT_EQ(reader.ColumnIndex("model"), 0);
  EXPECT_EQ(reader.ColumnIndex("grade"), -1);
  const std::vector<OwnedRecord> expected = {
      {2, 0, {{"A13", 2, 1, false}, {"24", 2, 5, false}, {"350.5", 2, 8, false}}},
      {3, 1, {{"B7", 3, 1, false}, {"", 3, 4, false}, {"410", 3, 5, false}}},
  };
  EXPECT_EQ(ReadAll(reader), expected);
  EXPECT_EQ(reader.bytes_read(), std::filesystem::file_size(path));
}

// Column names go into every JSON the tool writes, which holds Unicode only: a name that is not
// UTF-8 is refused at its place in the header (a Latin-1 name ended in exit 3 at the JSON writer).
TEST_F(CsvReaderTest, AHeaderNameThatIsNotUtf8IsRefusedAtItsPlace) {
  const auto path = folder_.Write("latin1.csv", "price,age,gr\xE9" "de\n1,2,A\n");
  EXPECT_EQ(ErrorReadingAll(path), path.string() + ":1:11: the name in header field 3 is not UTF-8 text (byte 0xE9 "
                                   "at byte 3 of the name); stepledger reads data files as UTF-8: convert the file "
                                   "first (for example from Latin-1)");
  // Control: the same name in UTF-8 is read; a cell that is not UTF-8 is the scan's to judge.
  const auto utf8 = folder_.Write("utf8.csv", "price,age,gr\xC3\xA9" "de\n1,2,\xE9\n");
  EXPECT_NO_THROW(ReadAll(utf8));
}

// A NUL byte is well-formed UTF-8 but never part of a name: a file saved as UTF-16 or a binary
// file. Refused at its place (the name would otherwise go into JSON as "\u0000").
TEST_F(CsvReaderTest, AHeaderNameHoldingANulByteIsRefusedAtItsPlace) {
  const auto path = folder_.Write("nul.csv", std::string("price,a\0ge\n1,2\n", 15));
  const std::string error = ErrorReadingAll(path);
  EXPECT_EQ(error.rfind(path.string() + ":1:7: the name in header field 2 holds a NUL byte (0x00) at byte 2 of the name; ", 0),
            0u)
      << error;
  EXPECT_NE(error.find("UTF-16"), std::string::npos) << error;
  // Control: a NUL in a cell is the scan's to judge, not the reader's.
  const auto cell = folder_.Write("cell.csv", std::string("price,age\n1,\0\n", 14));
  EXPECT_NO_THROW(ReadAll(cell));
}

TEST_F(CsvReaderTest, WhereNamesFileLineAndColumn) {
  const auto path = folder_.Write("where.csv", "a,b\n1,22\n");
  CsvReader reader(path);
  CsvRecord record;
  ASSERT_TRUE(reader.Next(record));
  EXPECT_EQ(reader.Where(record.fields[1]), path.string() + ":2:3");
}

TEST_F(CsvReaderTest, SemicolonDelimiterKeepsCommasInFields) {
  const auto path = folder_.Write("semicolon.csv", "grade;price\nA;1,5\n\"B;C\";2\n");
  CsvOptions options;
  options.delimiter = ';';
  const std::vector<OwnedRecord> expected = {
      {2, 0, {{"A", 2, 1, false}, {"1,5", 2, 3, false}}},
      {3, 1, {{"B;C", 3, 1, true}, {"2", 3, 7, false}}},
  };
  EXPECT_EQ(ReadAll(path, options), expected);
}

TEST_F(CsvReaderTest, TabDelimiter) {
  const auto path = folder_.Write("tab.tsv", "a\tb\n1\t2\n");
  CsvOptions options;
  options.delimiter = '\t';
  const std::vector<OwnedRecord> expected = {{2, 0, {{"1", 2, 1, false}, {"2", 2, 3, false}}}};
  EXPECT_EQ(ReadAll(path, options), expected);
}

TEST_F(CsvReaderTest, QuotedFieldsWithDelimitersDoubledQuotesAndNewlines) {
  const auto path = folder_.Write("quoted.csv",
                                  "id,note,price\n"
                                  "1,\"scratched, lid\",100\n"
                                  "2,\"the \"\"pro\"\" one\",\"200\"\n"
                                  "3,\"line one\nline two\n\",300\n"
                                  "4,\"\",\"\"\"\"\n");
  const std::vector<OwnedRecord> expected = {
      {2, 0, {{"1", 2, 1, false}, {"scratched, lid", 2, 3, true}, {"100", 2, 20, false}}},
      {3, 1, {{"2", 3, 1, false}, {"the \"pro\" one", 3, 3, true}, {"200", 3, 21, true}}},
      // The quoted newlines count as lines: the field after them is on line 6, column 3.
      {4, 2, {{"3", 4, 1, false}, {"line one\nline two\n", 4, 3, true}, {"300", 6, 3, false}}},
      {7, 3, {{"4", 7, 1, false}, {"", 7, 3, true}, {"\"", 7, 6, true}}},
  };
  EXPECT_EQ(ReadAll(path), expected);
}

TEST_F(CsvReaderTest, ManyCollapsedFieldsInOneRecordStayValid) {
  // Enough doubled-quote fields that the reader's storage must grow while collecting them.
  std::string header, row;
  std::vector<std::string> expected_texts;
  for (int index = 0; index < 200; ++index) {
    header += (index ? "," : "") + std::string("c") + std::to_string(index);
    const std::string text = "v\"" + std::to_string(index) + "\"" + std::string(index % 17, 'x');
    std::string quoted = "\"";
    for (char c : text) quoted += c == '"' ? std::string("\"\"") : std::string(1, c);
    row += (index ? "," : "") + quoted + "\"";
    expected_texts.push_back(text);
  }
  const auto path = folder_.Write("collapsed.csv", header + "\n" + row + "\n");
  CsvReader reader(path);
  CsvRecord record;
  ASSERT_TRUE(reader.Next(record));
  ASSERT_EQ(record.fields.size(), expected_texts.size());
  for (std::size_t index = 0; index < expected_texts.size(); ++index) {
    EXPECT_EQ(record.fields[index].text, expected_texts[index]) << "field " << index;
  }
  EXPECT_FALSE(reader.Next(record));
}

TEST_F(CsvReaderTest, CrlfLineEndsAreNotPartOfFields) {
  const auto path = folder_.Write("crlf.csv", "a,b\r\n1,\"x\"\r\n2,y\r\n");
  const std::vector<OwnedRecord> expected = {
      {2, 0, {{"1", 2, 1, false}, {"x", 2, 3, true}}},
      {3, 1, {{"2", 3, 1, false}, {"y", 3, 3, false}}},
  };
  EXPECT_EQ(ReadAll(path), expected);
}

TEST_F(CsvReaderTest, CarriageReturnInsideAFieldIsKept) {
  const auto path = folder_.Write("cr.csv", "a,b\nx\ry,\"p\r\nq\"\n");
  const std::vector<OwnedRecord> expected = {{2, 0, {{"x\ry", 2, 1, false}, {"p\r\nq", 2, 5, true}}}};
  EXPECT_EQ(ReadAll(path), expected);
}

TEST_F(CsvReaderTest, ByteOrderMarkIsSkippedAndNotCounted) {
  const auto path = folder_.Write("bom.csv", "\xEF\xBB\xBFmodel,price\nA,1\n");
  CsvReader reader(path);
  EXPECT_EQ(reader.header(), (std::vector<std::string>{"model", "price"}));
  const std::vector<OwnedRecord> expected = {{2, 0, {{"A", 2, 1, false}, {"1", 2, 3, false}}}};
  EXPECT_EQ(ReadAll(reader), expected);
  // Columns of line 1 start after the BOM: the duplicate below is at 1:3, not 1:6.
  const auto duplicate = folder_.Write("bom-duplicate.csv", "\xEF\xBB\xBF" "a,a\n");
  EXPECT_EQ(ErrorReadingAll(duplicate),
            duplicate.string() +
                ":1:3: duplicate column name 'a' in header fields 1 and 2 (first at column 1)");
}

TEST_F(CsvReaderTest, FinalLineWithoutNewline) {
  const auto path = folder_.Write("no-final-newline.csv", "a,b\n1,2\n3,\"4\"");
  const std::vector<OwnedRecord> expected = {
      {2, 0, {{"1", 2, 1, false}, {"2", 2, 3, false}}},
      {3, 1, {{"3", 3, 1, false}, {"4", 3, 3, true}}},
  };
  EXPECT_EQ(ReadAll(path), expected);
  const auto unquoted = folder_.Write("no-final-newline-2.csv", "a,b\r\n1,2");
  EXPECT_EQ(ReadAll(unquoted).size(), 1u);
}

TEST_F(CsvReaderTest, TrailingEmptyLinesAreNotRecords) {
  for (const std::string tail : {"\n", "\r\n", "\n\n\n", "\r\n\r\n"}) {
    const auto path = folder_.Write("trailing.csv", "a,b\n1,2\n" + tail);
    CsvReader reader(path);
    const std::vector<OwnedRecord> records = ReadAll(reader);
    ASSERT_EQ(records.size(), 1u) << "tail " << QuoteForMessage(tail);
    EXPECT_EQ(reader.bytes_read(), std::filesystem::file_size(path));
  }
}

TEST_F(CsvReaderTest, EmptyLineInsideASingleColumnFileIsAMissingCell) {
  const auto path = folder_.Write("one-column.csv", "price\n1\n\n3\n\n");
  const std::vector<OwnedRecord> expected = {
      {2, 0, {{"1", 2, 1, false}}},
      {3, 1, {{"", 3, 1, false}}},
      {4, 2, {{"3", 4, 1, false}}},
  };
  EXPECT_EQ(ReadAll(path), expected);
}

TEST_F(CsvReaderTest, TrailingDelimiterMakesAnEmptyLastField) {
  const auto path = folder_.Write("trailing-delimiter.csv", "a,b,c\n1,2,\n4,5,");
  const std::vector<OwnedRecord> expected = {
      {2, 0, {{"1", 2, 1, false}, {"2", 2, 3, false}, {"", 2, 5, false}}},
      {3, 1, {{"4", 3, 1, false}, {"5", 3, 3, false}, {"", 3, 5, false}}},
  };
  EXPECT_EQ(ReadAll(path), expected);
}

TEST_F(CsvReaderTest, HeaderOnlyFileHasNoRecords) {
  EXPECT_TRUE(ReadAll(folder_.Write("header-only.csv", "a,b\n")).empty());
  EXPECT_TRUE(ReadAll(folder_.Write("header-only-2.csv", "a,b")).empty());
}

TEST_F(CsvReaderTest, QuotedHeaderNames) {
  const auto path = folder_.Write("quoted-header.csv", "\"price, EUR\",\"the \"\"grade\"\"\"\n1,A\n");
  CsvReader reader(path);
  EXPECT_EQ(reader.header(), (std::vector<std::string>{"price, EUR", "the \"grade\""}));
  EXPECT_EQ(reader.ColumnIndex("the \"grade\""), 1);
}

// ---- errors: each names file:line:column and the offending text ----

TEST_F(CsvReaderTest, RaggedRowWithTooManyFieldsPointsAtTheFirstExtraField) {
  const auto path = folder_.Write("ragged-long.csv", "a,b,c,d,e\n1,2,3,4,5\n1,2,3,4,5,66\n");
  EXPECT_EQ(ErrorReadingAll(path),
            path.string() +
                ":3:11: expected 5 fields as in the header, found 6; the first extra field is '66'");
}

TEST_F(CsvReaderTest, RaggedRowWithTooFewFieldsQuotesTheRecord) {
  const auto path = folder_.Write("ragged-short.csv", "a,b,c\r\n1,2,3\r\n4,\"5\"\r\n");
  EXPECT_EQ(ErrorReadingAll(path),
            path.string() + ":3:1: expected 3 fields as in the header, found 2 in the record '4,\"5\"'");
}

TEST_F(CsvReaderTest, EmptyLineInTheMiddleIsARaggedRow) {
  const auto path = folder_.Write("blank-line.csv", "a,b\n1,2\n\n3,4\n");
  EXPECT_EQ(ErrorReadingAll(path),
            path.string() + ":3:1: expected 2 fields as in the header, found an empty line");
}

TEST_F(CsvReaderTest, RaggedRowAfterQuotedNewlineCountsLines) {
  const auto path = folder_.Write("ragged-after-newline.csv", "a,b\n\"x\ny\",1\n2,3,4\n");
  EXPECT_EQ(ErrorReadingAll(path),
            path.string() + ":4:5: expected 2 fields as in the header, found 3; the first extra field is '4'");
}

TEST_F(CsvReaderTest, UnterminatedQuoteNamesWhereItOpened) {
  const auto path = folder_.Write("unterminated.csv", "a,b\n1,2\n3,\"never closed\n4,5\n");
  EXPECT_EQ(ErrorReadingAll(path),
            path.string() +
                ":3:3: quoted field opened here is never closed (it starts '\"never closed\\n4,5\\n')");
}

TEST_F(CsvReaderTest, UnterminatedQuoteInHeader) {
  const auto path = folder_.Write("unterminated-header.csv", "a,\"b\n");
  EXPECT_EQ(ErrorReadingAll(path),
            path.string() + ":1:3: quoted field opened here is never closed (it starts '\"b\\n')");
}

TEST_F(CsvReaderTest, QuoteInsideUnquotedFieldPointsAtTheQuote) {
  const auto path = folder_.Write("stray-quote.csv", "a,b\n1,12\"inch\n");
  EXPECT_EQ(ErrorReadingAll(path),
            path.string() +
                ":2:5: quote character inside unquoted field '12\"inch'; quote the whole field and "
                "double each quote inside it");
}

TEST_F(CsvReaderTest, TextAfterClosingQuotePointsAtTheText) {
  const auto path = folder_.Write("after-quote.csv", "a,b\n1,\"12\"inch,\n");
  EXPECT_EQ(ErrorReadingAll(path),
            path.string() +
                ":2:7: unexpected text after the closing quote of field '\"12\"inch'; a quoted field "
                "ends at its closing quote");
}

TEST_F(CsvReaderTest, DuplicateHeaderNamesNameBothColumns) {
  const auto path = folder_.Write("duplicate.csv", "price,grade,age,grade\n1,A,2,B\n");
  EXPECT_EQ(InputErrorOf([&] { CsvReader reader(path); }),
            path.string() +
                ":1:17: duplicate column name 'grade' in header fields 2 and 4 (first at column 7)");
}

TEST_F(CsvReaderTest, EmptyHeaderNameIsAnError) {
  const auto path = folder_.Write("empty-name.csv", "price,,age\n1,2,3\n");
  EXPECT_EQ(InputErrorOf([&] { CsvReader reader(path); }),
            path.string() + ":1:7: header field 2 has an empty name; every column needs one");
  const auto quoted = folder_.Write("empty-quoted-name.csv", "price,\"\"\n1,2\n");
  EXPECT_EQ(InputErrorOf([&] { CsvReader reader(quoted); }),
            quoted.string() + ":1:7: header field 2 has an empty name; every column needs one");
}

TEST_F(CsvReaderTest, EmptyFileAndEmptyHeaderLine) {
  const auto empty = folder_.Write("empty.csv", "");
  EXPECT_EQ(InputErrorOf([&] { CsvReader reader(empty); }),
            empty.string() + ":1:1: the file is empty; expected a header row of column names");
  const auto bom_only = folder_.Write("bom-only.csv", "\xEF\xBB\xBF");
  EXPECT_EQ(InputErrorOf([&] { CsvReader reader(bom_only); }),
            bom_only.string() + ":1:1: the file is empty; expected a header row of column names");
  const auto blank = folder_.Write("blank.csv", "\r\na,b\n");
  EXPECT_EQ(InputErrorOf([&] { CsvReader reader(blank); }),
            blank.string() + ":1:1: the header line is empty; expected a row of column names");
}

TEST_F(CsvReaderTest, UnreadableFileNamesThePathAndTheReason) {
  const auto missing = folder_.path() / "no-such-file.csv";
  EXPECT_EQ(InputErrorOf([&] { CsvReader reader(missing); }),
            "cannot open data file '" + missing.string() + "': No such file or directory");
  // A folder opens but cannot be read.
  EXPECT_EQ(InputErrorOf([&] { CsvReader reader(folder_.path()); }),
            folder_.path().string() + ": cannot read at stored byte 0: Is a directory");
}

TEST_F(CsvReaderTest, OptionsAreValidated) {
  const auto path = folder_.Write("options.csv", "a\n1\n");
  CsvOptions quote_delimiter;
  quote_delimiter.delimiter = '"';
  EXPECT_EQ(InputErrorOf([&] { CsvReader reader(path, quote_delimiter); }),
            "CSV option 'delimiter' is '\"'; it must be one byte other than a double quote, CR or LF");
  CsvOptions newline_delimiter;
  newline_delimiter.delimiter = '\n';
  EXPECT_EQ(InputErrorOf([&] { newline_delimiter.Validate(); }),
            "CSV option 'delimiter' is '\\n'; it must be one byte other than a double quote, CR or LF");
  CsvOptions no_block;
  no_block.block_bytes = 0;
  EXPECT_EQ(InputErrorOf([&] { no_block.Validate(); }),
            "CSV option 'block_bytes' is 0; it must be at least 1");
  CsvOptions no_columns;
  no_columns.max_columns = 0;
  EXPECT_EQ(InputErrorOf([&] { no_columns.Validate(); }),
            "CSV option 'max_columns' is 0; it must be at least 1");
}

// ---- the columns limit (InputLimits::columns, CsvOptions::max_columns) ----

TEST_F(CsvReaderTest, HeaderWiderThanTheColumnsLimitNamesWhereTheExtraFieldStarts) {
  CsvOptions options;
  options.max_columns = 3;
  const auto path = folder_.Write("wide.csv", "price,age,grade,colour\n1,2,A,red\n");
  const LimitError error = LimitErrorOf([&] { CsvReader reader(path, options); });
  EXPECT_EQ(error.limit(), LimitKind::kColumns);
  EXPECT_EQ(error.value(), 3u);
  EXPECT_STREQ(error.what(), (path.string() + ":1:17: the header has more than 3 columns (field 4 starts "
                                              "here); the columns limit is 3").c_str());
  // Exactly at the limit is fine.
  const auto three = folder_.Write("three.csv", "price,age,grade\n1,2,A\n");
  EXPECT_EQ(CsvReader(three, options).header().size(), 3u);
}

TEST_F(CsvReaderTest, ColumnsLimitCountsFieldsAsTheParseDoes) {
  // Delimiters and line ends inside quotes, doubled quotes, a BOM (columns count after it) and
  // CRLF: four fields, not more.
  CsvOptions options;
  options.max_columns = 4;
  const auto four = folder_.Write("quoted.csv", "\xEF\xBB\xBF\"a,b\",\"c\"\"d,\",\"e\nf\",g\r\n1,2,3,4\r\n");
  const CsvReader reader(four, options);
  EXPECT_EQ(reader.header(), (std::vector<std::string>{"a,b", "c\"d,", "e\nf", "g"}));
  options.max_columns = 3;
  const LimitError error = LimitErrorOf([&] { CsvReader again(four, options); });
  // Field 4 ("g") starts on line 2 (after the quoted line end), column 4.
  EXPECT_NE(std::string(error.what()).find(four.string() + ":2:4: the header has more than 3 columns"),
            std::string::npos)
      << error.what();
  // Lines ended by CR alone make the whole file one line: the count names the first lone CR
  // (the message the parse gives) rather than a header too wide, whatever the file's length.
  std::string cr_only = "price,age\r";
  for (int row = 0; row < 10'000; ++row) cr_only += "100,2\r";
  const auto cr_path = folder_.Write("cr-only.csv", cr_only);
  options.max_columns = 10;
  EXPECT_EQ(InputErrorOf([&] { CsvReader reader(cr_path, options); }),
            cr_path.string() + ":1:10: the header holds a carriage return that is not followed by a line feed: "
                               "lines must end in LF or CR LF (a file whose lines end in CR alone needs converting "
                               "first)");
  // A tab-separated header counts tabs.
  options.delimiter = '\t';
  options.max_columns = 2;
  const auto tabs = folder_.Write("tabs.tsv", "a\tb,c\td\n");
  EXPECT_NE(std::string(LimitErrorOf([&] { CsvReader reader(tabs, options); }).what()).find(":1:7:"),
            std::string::npos);
}

TEST_F(CsvReaderTest, ColumnsLimitStopsAnEndlessHeaderAfterABoundedRead) {
  // A header line that never ends (a source that always has more "cNNN," bytes): without the
  // count while reading, the reader would hold it whole (and never finish); with it, the reader
  // stops after about the first max_columns names.
  CsvOptions options;
  options.max_columns = 10'000;
  options.block_bytes = 1 << 16;
  std::uint64_t supplied = 0;
  std::uint64_t next_name = 0;
  std::string pending;
  auto endless = [&](char* buffer, std::size_t capacity) -> std::size_t {
    while (pending.size() < capacity) pending += "c" + std::to_string(next_name++) + ",";
    std::copy_n(pending.data(), capacity, buffer);
    pending.erase(0, capacity);
    supplied += capacity;
    return capacity;
  };
  const LimitError error = LimitErrorOf([&] { CsvReader reader("endless.csv", endless, options); });
  EXPECT_NE(std::string(error.what()).find("endless.csv:1:"), std::string::npos) << error.what();
  EXPECT_NE(std::string(error.what()).find("more than 10,000 columns (field 10,001 starts here)"),
            std::string::npos)
      << error.what();
  // 10,000 names of at most 6 bytes with their commas are under 70 KB; the reader doubles its
  // buffer, so it may read ahead at most about as much again plus a block.
  EXPECT_LT(supplied, 4u * 70'000u + 2u * options.block_bytes) << supplied;
}

TEST_F(CsvReaderTest, WideHeaderWithinTheLimitReadsInLinearTime) {
  // 100,000 distinct names: the duplicate check is a hash lookup per name (a pairwise check is
  // 5e9 comparisons, tens of seconds).
  std::string text;
  for (int c = 0; c < 100'000; ++c) text += (c == 0 ? "" : ",") + ("column_" + std::to_string(c));
  text += "\n";
  const auto path = folder_.Write("wide.csv", text);
  CsvOptions options;
  options.max_columns = 100'000;
  const auto started = std::chrono::steady_clock::now();
  const CsvReader reader(path, options);
  const double seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - started).count();
  EXPECT_EQ(reader.header().size(), 100'000u);
  EXPECT_LT(seconds, 3.0) << "common practice: a header is read in well under a second";
  // A duplicate far apart is still named with both places.
  const auto duplicate = folder_.Write("duplicate-far.csv", text.substr(0, text.size() - 1) + ",column_17\n");
  options.max_columns = 100'001;
  EXPECT_NE(InputErrorOf([&] { CsvReader again(duplicate, options); })
                .find("duplicate column name 'column_17' in header fields 18 and 100001"),
            std::string::npos);
}

// ---- block sizes and the byte observer ----

// Every feature at once: BOM, CRLF and LF, quoted delimiters, doubled quotes, quoted CRLF and
// LF newlines, a missing field, a trailing empty line.
constexpr std::string_view kAwkwardFile =
    "\xEF\xBB\xBF" "id,\"note, long\",price\r\n"
    "1,\"two\r\nlines\",10\r\n"
    "2,,\"2\"\"0\"\n"
    "3,\"a\nb\nc\",\"\"\n"
    "4,plain,40\r\n"
    "\"5\",\"x,y\",\"\"\"\"\r\n"
    "6,last,60\r\n"
    "\r\n";

TEST_F(CsvReaderTest, AnyBlockSizeGivesTheSameRecords) {
  const auto path = folder_.Write("awkward.csv", std::string(kAwkwardFile));
  const std::vector<OwnedRecord> reference = ReadAll(path);
  const std::vector<OwnedRecord> expected = {
      {2, 0, {{"1", 2, 1, false}, {"two\r\nlines", 2, 3, true}, {"10", 3, 8, false}}},
      {4, 1, {{"2", 4, 1, false}, {"", 4, 3, false}, {"2\"0", 4, 4, true}}},
      {5, 2, {{"3", 5, 1, false}, {"a\nb\nc", 5, 3, true}, {"", 7, 4, true}}},
      {8, 3, {{"4", 8, 1, false}, {"plain", 8, 3, false}, {"40", 8, 9, false}}},
      {9, 4, {{"5", 9, 1, true}, {"x,y", 9, 5, true}, {"\"", 9, 11, true}}},
      {10, 5, {{"6", 10, 1, false}, {"last", 10, 3, false}, {"60", 10, 8, false}}},
  };
  ASSERT_EQ(reference, expected);
  for (std::size_t block_bytes = 1; block_bytes <= kAwkwardFile.size() + 2; ++block_bytes) {
    CsvOptions options;
    options.block_bytes = block_bytes;
    CsvReader reader(path, options);
    EXPECT_EQ(reader.header(), (std::vector<std::string>{"id", "note, long", "price"}));
    EXPECT_EQ(ReadAll(reader), reference) << "block_bytes " << block_bytes;
    EXPECT_EQ(reader.bytes_read(), kAwkwardFile.size()) << "block_bytes " << block_bytes;
  }
}

// The messages quote the offending field to its end, however little of it the buffer held when
// the broken quote was seen (found by fuzz/csv_reader_fuzz.cpp: text after a closing quote was
// quoted only up to the end of the block; fuzz/regressions/csv_reader/).
TEST_F(CsvReaderTest, AnyBlockSizeGivesTheSameErrors) {
  const auto unterminated = folder_.Write("late-unterminated.csv", "a,b\r\n1,2\r\n\"x\r\n,3\r\n");
  const auto stray = folder_.Write("late-stray.csv", "a,b\n\"1\n\",2\n3,4\"\n");
  // A line end inside quotes lets the reader parse the record before its last line is read.
  const auto after_closing = folder_.Write("late-after-closing.csv", "a,b\n1,2\n3,\"4\n\"5678\r9,\n");
  const auto inside = folder_.Write("late-inside.csv", "a,b\n1,2\n\"x\ny\",4\"5678\r9\r\n");
  for (std::size_t block_bytes : {1, 2, 3, 4, 5, 7, 11, 64, 1 << 20}) {
    CsvOptions options;
    options.block_bytes = block_bytes;
    EXPECT_EQ(ErrorReadingAll(unterminated, options),
              unterminated.string() +
                  ":3:1: quoted field opened here is never closed (it starts '\"x\\r\\n,3\\r\\n')")
        << "block_bytes " << block_bytes;
    EXPECT_EQ(ErrorReadingAll(stray, options),
              stray.string() +
                  ":4:4: quote character inside unquoted field '4\"'; quote the whole field and "
                  "double each quote inside it")
        << "block_bytes " << block_bytes;
    EXPECT_EQ(ErrorReadingAll(after_closing, options),
              after_closing.string() +
                  ":4:2: unexpected text after the closing quote of field '\"4\\n\"5678\\r9'; a quoted "
                  "field ends at its closing quote")
        << "block_bytes " << block_bytes;
    EXPECT_EQ(ErrorReadingAll(inside, options),
              inside.string() +
                  ":4:5: quote character inside unquoted field '4\"5678\\r9'; quote the whole field and "
                  "double each quote inside it")
        << "block_bytes " << block_bytes;
  }
}

TEST_F(CsvReaderTest, ByteObserverSeesEveryByteOnceInOrder) {
  const auto path = folder_.Write("observed.csv", std::string(kAwkwardFile));
  for (std::size_t block_bytes : {1, 2, 3, 7, 16, 100, 1 << 20}) {
    CsvOptions options;
    options.block_bytes = block_bytes;
    CsvReader reader(path, options);
    std::string seen;
    std::size_t calls = 0;
    reader.SetByteObserver([&](std::string_view bytes) {
      seen.append(bytes);
      ++calls;
    });
    const std::size_t replayed = seen.size();
    EXPECT_GT(replayed, 0u) << "the header's bytes are replayed";
    ReadAll(reader);
    EXPECT_EQ(seen, kAwkwardFile) << "block_bytes " << block_bytes;
    EXPECT_GE(calls, 1u);
  }
}

TEST_F(CsvReaderTest, ByteObserverSetLateIsRefused) {
  const auto path = folder_.Write("late-observer.csv", "a\n1\n");
  CsvReader reader(path);
  CsvRecord record;
  ASSERT_TRUE(reader.Next(record));
  EXPECT_THROW(reader.SetByteObserver([](std::string_view) {}), std::logic_error);
}

TEST_F(CsvReaderTest, ReaderCanBeMoved) {
  const auto path = folder_.Write("moved.csv", "a\n1\n2\n");
  CsvReader first(path);
  CsvRecord record;
  ASSERT_TRUE(first.Next(record));
  CsvReader second(std::move(first));
  ASSERT_TRUE(second.Next(record));
  EXPECT_EQ(record.fields[0].text, "2");
  EXPECT_EQ(record.row_index, 1u);
  EXPECT_FALSE(second.Next(record));
}

// Round trip: random records are written with quoting wherever it is needed (and sometimes
// where it is not), with LF or CRLF, an optional BOM and an optional final line end; the
// reader must give back exactly the texts, lines and columns the writer put there, for any
// block size. The writer, not a second parser, is the reference.
TEST_F(CsvReaderTest, RandomFilesRoundTripAtAnyBlockSize) {
  std::mt19937 generator(20261201);
  const std::string alphabet[] = {"a", "7", " ", ",", ";", "\"", "\n", "\r", "\xC3\xA9", "x"};
  auto uniform = [&](int low, int high) {
    return std::uniform_int_distribution<int>(low, high)(generator);
  };
  for (int trial = 0; trial < 300; ++trial) {
    const char delimiter = uniform(0, 1) == 0 ? ',' : ';';
    const int columns = uniform(1, 5);
    const int rows = uniform(0, 12);
    const bool bom = uniform(0, 3) == 0;
    std::string file = bom ? "\xEF\xBB\xBF" : "";
    std::uint64_t line = 1;
    std::size_t line_start = file.size();
    std::vector<OwnedRecord> expected;
    std::vector<std::string> header;
    for (int row = -1; row < rows; ++row) {
      OwnedRecord record{line, static_cast<std::uint64_t>(row), {}};
      for (int column = 0; column < columns; ++column) {
        std::string text;
        if (row < 0) {
          text = "c" + std::to_string(column);
        } else {
          for (int length = uniform(0, 6); length > 0; --length) text += alphabet[uniform(0, 9)];
        }
        const bool needs_quotes = text.find_first_of(std::string("\"\r\n") + delimiter) !=
                                      std::string::npos ||
                                  (columns == 1 && text.empty());
        const bool quoted = needs_quotes || uniform(0, 5) == 0;
        if (column > 0) file += delimiter;
        record.fields.push_back({text, line, file.size() - line_start + 1, quoted});
        if (!quoted) {
          file += text;
          continue;
        }
        file += '"';
        for (char c : text) {
          if (c == '"') file += '"';
          file += c;
          if (c == '\n') {
            ++line;
            line_start = file.size();
          }
        }
        file += '"';
      }
      const bool last = row == rows - 1;
      if (!last || uniform(0, 1) == 0) {
        file += uniform(0, 1) == 0 ? "\n" : "\r\n";
        ++line;
        line_start = file.size();
        if (last && uniform(0, 2) == 0) file += "\r\n";  // a trailing empty line
      }
      if (row < 0) {
        for (const OwnedField& field : record.fields) header.push_back(field.text);
      } else {
        expected.push_back(std::move(record));
      }
    }
    const auto path = folder_.Write("random.csv", file);
    for (std::size_t block_bytes : {std::size_t{1}, std::size_t(uniform(2, 9)), std::size_t{4096}}) {
      CsvOptions options;
      options.delimiter = delimiter;
      options.block_bytes = block_bytes;
      CsvReader reader(path, options);
      std::string observed;
      reader.SetByteObserver([&](std::string_view bytes) { observed.append(bytes); });
      ASSERT_EQ(reader.header(), header) << "trial " << trial << " file '" << QuoteForMessage(file, 400) << "'";
      ASSERT_EQ(ReadAll(reader), expected)
          << "trial " << trial << " block_bytes " << block_bytes << " file '"
          << QuoteForMessage(file, 400) << "'";
      EXPECT_EQ(observed, file);
      EXPECT_EQ(reader.bytes_read(), file.size());
    }
  }
}

// ---- ClassifyCell ----

struct CellCase {
  std::string text;
  CellKind kind;
  double value;  // checked for kNumber only
};

TEST(ClassifyCellTest, NumbersMissingTokensTextAndNonFinite) {
  const std::vector<std::string> missing = {"", "NA"};
  const std::vector<CellCase> cases = {
      {"1.5", CellKind::kNumber, 1.5},
      {"-3e2", CellKind::kNumber, -300},
      {"+2", CellKind::kNumber, 2},
      {"+.5", CellKind::kNumber, 0.5},
      {"5.", CellKind::kNumber, 5},
      {"0", CellKind::kNumber, 0},
      {"-0", CellKind::kNumber, -0.0},
      {"1E3", CellKind::kNumber, 1000},
      {"", CellKind::kMissing, 0},
      {"NA", CellKind::kMissing, 0},
      {"na", CellKind::kText, 0},  // tokens match exactly
      {" 1", CellKind::kText, 0},
      {"1 ", CellKind::kText, 0},
      {"+-1", CellKind::kText, 0},
      {"++1", CellKind::kText, 0},
      {"+", CellKind::kText, 0},
      {"-", CellKind::kText, 0},
      {"1,5", CellKind::kText, 0},
      {"0x10", CellKind::kText, 0},
      {"1e", CellKind::kText, 0},
      {"grade A", CellKind::kText, 0},
      {"nan", CellKind::kNonFinite, 0},
      {"NaN", CellKind::kNonFinite, 0},
      {"-nan", CellKind::kNonFinite, 0},
      {"inf", CellKind::kNonFinite, 0},
      {"+INF", CellKind::kNonFinite, 0},
      {"-Infinity", CellKind::kNonFinite, 0},
      {"1e999", CellKind::kNonFinite, 0},  // beyond the largest double
  };
  for (const CellCase& cell : cases) {
    double value = 12345;
    const CellKind kind = ClassifyCell(cell.text, missing, value);
    EXPECT_EQ(kind, cell.kind) << "cell '" << cell.text << "'";
    if (cell.kind == CellKind::kNumber && kind == CellKind::kNumber) {
      EXPECT_EQ(value, cell.value) << "cell '" << cell.text << "'";
      EXPECT_EQ(std::signbit(value), std::signbit(cell.value)) << "cell '" << cell.text << "'";
    }
  }
}

TEST(ClassifyCellTest, UnderflowIsAFiniteNumberNearZero) {
  double value = 1;
  ASSERT_EQ(ClassifyCell("1e-400", {}, value), CellKind::kNumber);
  EXPECT_EQ(value, 0.0);
  ASSERT_EQ(ClassifyCell("4e-320", {}, value), CellKind::kNumber);  // a subnormal
  EXPECT_GT(value, 0.0);
  EXPECT_LT(value, 1e-300);
}

TEST(ClassifyCellTest, CustomMissingTokens) {
  const std::vector<std::string> missing = {"-", "n/a", "nan"};
  double value = 0;
  EXPECT_EQ(ClassifyCell("-", missing, value), CellKind::kMissing);
  EXPECT_EQ(ClassifyCell("n/a", missing, value), CellKind::kMissing);
  EXPECT_EQ(ClassifyCell("nan", missing, value), CellKind::kMissing);  // tokens come first
  EXPECT_EQ(ClassifyCell("NaN", missing, value), CellKind::kNonFinite);
  EXPECT_EQ(ClassifyCell("", missing, value), CellKind::kText);  // empty is not a token here
  EXPECT_EQ(ClassifyCell("NA", missing, value), CellKind::kText);
}

}  // namespace
}  // namespace stepledger
