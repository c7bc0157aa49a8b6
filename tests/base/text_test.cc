// Tests of the text helpers: number parsing edge cases, flags, fixed and
// shortest formatting, edit distance and "did you mean".
#include "paritas/base/text.h"

#include <algorithm>
#include <charconv>
#include <cmath>
#include <cstring>
#include <limits>
#include <random>
#include <string>
#include <vector>

#include "test_util.h"

namespace paritas {
namespace {

TEST(ParseNumber, AcceptsDecimalsWithSpacesAndLeadingPlus) {
  double value = 0.0;
  EXPECT_EQ(ParseNumber(" 4.10 ", &value), NumberStatus::kOk);
  EXPECT_EQ(value, 4.10);
  EXPECT_EQ(ParseNumber("+2.5", &value), NumberStatus::kOk);
  EXPECT_EQ(value, 2.5);
  EXPECT_EQ(ParseNumber("-4.10", &value), NumberStatus::kOk);
  EXPECT_EQ(value, -4.10);
  EXPECT_EQ(ParseNumber("1e3", &value), NumberStatus::kOk);
  EXPECT_EQ(value, 1000.0);
  EXPECT_EQ(ParseNumber("\t7\t", &value), NumberStatus::kOk);
  EXPECT_EQ(value, 7.0);
}

TEST(ParseNumber, ReportsEmptyTextAsEmpty) {
  double value = 0.0;
  EXPECT_EQ(ParseNumber("", &value), NumberStatus::kEmpty);
  EXPECT_EQ(ParseNumber("   ", &value), NumberStatus::kEmpty);
}

TEST(ParseNumber, RejectsGarbageAndLeavesValueUntouched) {
  double value = 42.0;
  for (const char* text : {"abc", "1.2.3", "4,10", "12kg", "+", "+-1", "++1", "0x10", ".", "1 2"}) {
    EXPECT_EQ(ParseNumber(text, &value), NumberStatus::kInvalid) << text;
  }
  EXPECT_EQ(value, 42.0);
}

TEST(ParseNumber, ReportsInfinityAndNanAsNonFinite) {
  double value = 42.0;
  for (const char* text : {"inf", "-inf", "nan", "NaN", "infinity"}) {
    EXPECT_EQ(ParseNumber(text, &value), NumberStatus::kNonFinite) << text;
  }
  EXPECT_EQ(value, 42.0);
}

// Finite numbers beyond a double: too large, or so near zero that they
// would round to zero (subnormal numbers are still read).
TEST(ParseNumber, TellsOverflowFromUnderflow) {
  double value = 42.0;
  for (const char* text :
       {"1e999", "-1e400", "1.8e308", "123456789e305", " +1e99999999999999999999 "}) {
    EXPECT_EQ(ParseNumber(text, &value), NumberStatus::kOverflow) << text;
  }
  for (const char* text :
       {"1e-400", "-1e-400", "2e-324", "0.00001e-320", "100e-327", "1e-99999999999999999999"}) {
    EXPECT_EQ(ParseNumber(text, &value), NumberStatus::kUnderflow) << text;
  }
  EXPECT_EQ(value, 42.0);
  EXPECT_EQ(ParseNumber("4e-324", &value), NumberStatus::kOk);
  EXPECT_EQ(ParseNumber("0e-999", &value), NumberStatus::kOk);
  EXPECT_EQ(value, 0.0);
  EXPECT_EQ(
      NumberProblem(NumberStatus::kUnderflow, "price", "1e-400"),
      "price '1e-400' is outside the range of numbers (underflow: nearer to zero than 4.9e-324)");
  EXPECT_EQ(NumberProblem(NumberStatus::kOverflow, "price", "1e999"),
            "price '1e999' is outside the range of numbers (overflow: beyond 1.8e308)");
}

TEST(ParseNumber, ReadsTheLargestDoubleExactly) {
  double value = 0.0;
  ASSERT_EQ(ParseNumber("1.7976931348623157e308", &value), NumberStatus::kOk);
  EXPECT_EQ(value, std::numeric_limits<double>::max());
}

// Plain decimals ("28.6609") take a fast path (an exact quotient, Clinger
// 1990); every value must be the double std::from_chars gives, bit for bit,
// computed here for each text: short and long digit runs, 2^53 and beyond,
// 22 places and more, leading zeros.
TEST(ParseNumber, ReadsPlainDecimalsToTheSameBitsAsFromChars) {
  std::vector<std::string> texts = {"0",     "0.0",   "1",      "28.6609",         "0.1",
                                    "0.3",   "4.35",  "1e3",    "9007199254740992", "9007199254740993",
                                    "9007199254740991.5", "123456789012345678", "1234567890123456789",
                                    "0.0000000000000000000001", "0.00000000000000000000001",
                                    "000123.4500", "17976931348623157"};
  std::mt19937_64 rng(2026);
  for (int k = 0; k < 20000; ++k) {
    std::string text = std::to_string(rng() % 1000000000);
    text.resize(1 + rng() % text.size());
    text += "." + std::to_string(rng() % 10000000000ull).substr(0, 1 + rng() % 10);
    texts.push_back(text);
  }
  for (const std::string& text : texts) {
    double expected = 0.0, value = -1.0;
    std::from_chars(text.data(), text.data() + text.size(), expected);
    ASSERT_EQ(ParseNumber(text, &value), NumberStatus::kOk) << text;
    EXPECT_EQ(std::memcmp(&value, &expected, sizeof(double)), 0) << text;
  }
  // Under decimal ',' the fast path reads a comma and refuses a point.
  double value = 0.0;
  EXPECT_EQ(ParseNumber("28,6609", &value, ','), NumberStatus::kOk);
  EXPECT_EQ(value, 28.6609);
  EXPECT_EQ(ParseNumber("28.6609", &value, ','), NumberStatus::kInvalid);
  EXPECT_EQ(ParseNumber("28,6609", &value), NumberStatus::kInvalid);
}

TEST(ParseFlag, AcceptsOneZeroYesNoTrueFalseInAnyCase) {
  bool value = false;
  for (const char* text : {"1", "yes", "YES", " True ", "true"}) {
    value = false;
    EXPECT_TRUE(ParseFlag(text, &value)) << text;
    EXPECT_TRUE(value) << text;
  }
  for (const char* text : {"0", "no", "No", "FALSE"}) {
    value = true;
    EXPECT_TRUE(ParseFlag(text, &value)) << text;
    EXPECT_FALSE(value) << text;
  }
  EXPECT_FALSE(ParseFlag("2", &value));
  EXPECT_FALSE(ParseFlag("y", &value));
  EXPECT_FALSE(ParseFlag("", &value));
}

TEST(Trim, RemovesSpacesAndTabsAtBothEndsOnly) {
  EXPECT_EQ(Trim("  a b\t"), "a b");
  EXPECT_EQ(Trim("\t \t"), "");
  EXPECT_EQ(Trim(""), "");
  EXPECT_EQ(Trim("x\n"), "x\n");
}

TEST(ToLower, LowersAsciiLettersOnly) {
  EXPECT_EQ(ToLower("GeKS-Fisher_1"), "geks-fisher_1");
  EXPECT_EQ(ToLower("\xC3\x84"), "\xC3\x84");  // UTF-8 bytes pass through.
}

TEST(FormatFixed, RoundsToTheGivenDecimals) {
  EXPECT_EQ(FormatFixed(2.345678, 3), "2.346");
  EXPECT_EQ(FormatFixed(100.0, 1), "100.0");
  EXPECT_EQ(FormatFixed(-1.25, 1), "-1.2");  // Round half to even on the binary value 1.25.
  EXPECT_EQ(FormatFixed(7.0, 0), "7");
}

// A price per gram of 0.00413 read "0.00" in a warning, and an absurd quote
// printed 80 digits. Expected texts are C's printf %.3g (ISO C 7.21.6.1).
TEST(FormatReadable, KeepsTwoSignificantDigitsAndNoLongRuns) {
  EXPECT_EQ(FormatReadable(2.345678, 2), "2.35");
  EXPECT_EQ(FormatReadable(0.1, 2), "0.10");
  EXPECT_EQ(FormatReadable(0.089, 3), "0.089");
  EXPECT_EQ(FormatReadable(0.00413, 2), "0.00413");
  EXPECT_EQ(FormatReadable(2.46e-50, 2), "2.46e-50");
  EXPECT_EQ(FormatReadable(123456789.0, 2), "123456789.00");
  EXPECT_EQ(FormatReadable(1.5e12, 2), "1.5e+12");
  EXPECT_EQ(FormatReadable(-0.004, 3), "-0.004");
  EXPECT_EQ(FormatReadable(0.0, 2), "0.00");
}

TEST(FormatFixed, PrintsNegativeZeroAndTinyNegativesWithoutSign) {
  EXPECT_EQ(FormatFixed(-0.0, 2), "0.00");
  EXPECT_EQ(FormatFixed(-0.0004, 3), "0.000");
  EXPECT_EQ(FormatFixed(-0.0006, 3), "-0.001");
}

TEST(FormatFixed, PrintsNanAsNothing) {
  EXPECT_EQ(FormatFixed(std::nan(""), 2), "");
  std::string out = "x";
  AppendShortest(std::nan(""), &out);
  EXPECT_EQ(out, "x");
}

TEST(AppendShortest, ReadsBackAsTheSameDouble) {
  for (double value : {0.1, 1.0 / 3.0, 123456.789, 1e-300, -2.5, 1e21}) {
    std::string text;
    AppendShortest(value, &text);
    double back = 0.0;
    ASSERT_EQ(ParseNumber(text, &back), NumberStatus::kOk) << text;
    EXPECT_EQ(back, value) << text;
  }
  std::string text;
  AppendShortest(0.1, &text);
  EXPECT_EQ(text, "0.1");
}

TEST(EditDistance, CountsInsertionsDeletionsAndSubstitutions) {
  // Classic textbook pair: kitten -> sitting needs 3 edits.
  EXPECT_EQ(EditDistance("kitten", "sitting"), 3);
  EXPECT_EQ(EditDistance("", "abc"), 3);
  EXPECT_EQ(EditDistance("abc", ""), 3);
  EXPECT_EQ(EditDistance("same", "same"), 0);
  EXPECT_EQ(EditDistance("refrence", "reference"), 1);
  EXPECT_EQ(EditDistance("flaw", "lawn"), 2);
}

// Two adjacent characters swapped is one slip of the fingers, so one edit
// (optimal string alignment distance); Levenshtein would count two.
TEST(EditDistance, CountsASwapOfAdjacentCharactersAsOneEdit) {
  EXPECT_EQ(EditDistance("PTR", "PRT"), 1);
  EXPECT_EQ(EditDistance("ab", "ba"), 1);
  EXPECT_EQ(EditDistance("bread", "beard"), 2);
  EXPECT_EQ(EditDistance("recieve", "receive"), 1);
  // Each character moves at most once: "ca" -> "abc" is 3, not 2.
  EXPECT_EQ(EditDistance("ca", "abc"), 3);
  EXPECT_EQ(EditDistance("PTR", "PRT", 0), 1);
  EXPECT_EQ(EditDistance("PTR", "PRT", 1), 1);
}

// The banded distance equals a full optimal-string-alignment table for every
// pair of words of up to 4 letters over {a, b, c}, at every bound.
TEST(EditDistance, AgreesWithTheFullTableOnAllShortWords) {
  std::vector<std::string> words = {""};
  for (size_t k = 0; k < words.size() && words[k].size() < 4; ++k) {
    for (char c : {'a', 'b', 'c'}) words.push_back(words[k] + c);
  }
  auto full = [](const std::string& a, const std::string& b) {
    std::vector<std::vector<int>> d(a.size() + 1, std::vector<int>(b.size() + 1));
    for (size_t i = 0; i <= a.size(); ++i) {
      for (size_t j = 0; j <= b.size(); ++j) {
        if (i == 0 || j == 0) {
          d[i][j] = static_cast<int>(i + j);
          continue;
        }
        d[i][j] = std::min(
            {d[i - 1][j] + 1, d[i][j - 1] + 1, d[i - 1][j - 1] + (a[i - 1] == b[j - 1] ? 0 : 1)});
        if (i > 1 && j > 1 && a[i - 1] == b[j - 2] && a[i - 2] == b[j - 1]) {
          d[i][j] = std::min(d[i][j], d[i - 2][j - 2] + 1);
        }
      }
    }
    return d[a.size()][b.size()];
  };
  for (const std::string& a : words) {
    for (const std::string& b : words) {
      const int expected = full(a, b);
      for (int bound = 0; bound <= 5; ++bound) {
        ASSERT_EQ(EditDistance(a, b, bound), std::min(expected, bound + 1))
            << a << " " << b << " " << bound;
      }
    }
  }
}

// A trial typed PTR for PRT and was offered ZAR: at two edits each, the first
// candidate won.
TEST(NearestName, PrefersTheCodeWithTwoCharactersSwapped) {
  EXPECT_EQ(NearestName("PTR", {"AUT", "ZAR", "PRT", "RUS"}), "PRT");
  EXPECT_EQ(NearestName("ptr", {"ZAR", "PRT"}), "PRT");
}

TEST(NearestName, SuggestsTheClosestPlausibleTypo) {
  const std::vector<std::string> keys = {"survey", "reference", "elementary", "aggregation"};
  EXPECT_EQ(NearestName("refrence", keys), "reference");
  EXPECT_EQ(NearestName("ELEMENTRY", keys), "elementary");
  EXPECT_EQ(NearestName("survy", keys), "survey");
}

TEST(NearestName, ReturnsNothingWhenNoCandidateIsClose) {
  const std::vector<std::string> keys = {"survey", "reference", "elementary"};
  EXPECT_EQ(NearestName("colour", keys), "");
  EXPECT_EQ(NearestName("x", {}), "");
}

// A 10 MB region code used to take about a second per lookup: every
// candidate lowered a copy of the word and filled a full 10 MB x |candidate|
// table. Codes are at most 200 bytes, so a word beyond 256 bytes is no typo
// of one and gets no suggestion, even from a long candidate one edit away.
TEST(NearestName, GivesNoSuggestionForAWordLongerThanAnyCode) {
  const std::string long_code(300, 'r');
  EXPECT_EQ(NearestName(long_code + "x", {"north", long_code}), "");
  const std::string huge_word(10 << 20, 'r');
  std::vector<std::string> regions;
  for (int r = 0; r < 1000; ++r) regions.push_back("region" + std::to_string(r));
  EXPECT_EQ(NearestName(huge_word, regions), "");
}

// The banded distance agrees with the full one up to the bound and says
// "beyond" with bound + 1.
TEST(EditDistance, StopsAtTheBoundGiven) {
  EXPECT_EQ(EditDistance("kitten", "sitting", 3), 3);
  EXPECT_EQ(EditDistance("kitten", "sitting", 2), 3);
  EXPECT_EQ(EditDistance("kitten", "sitting", 0), 1);
  EXPECT_EQ(EditDistance("abc", "", 1), 2);
  EXPECT_EQ(EditDistance("same", "same", 0), 0);
  const std::vector<std::string> words = {"",          "a",        "ab",         "ba",
                                          "abc",       "acb",      "bread",      "beard",
                                          "reference", "refrence", "elementary", "ELEMENTRY"};
  for (const std::string& a : words) {
    for (const std::string& b : words) {
      const int full = EditDistance(a, b);
      for (int bound = 0; bound <= 12; ++bound) {
        EXPECT_EQ(EditDistance(a, b, bound), std::min(full, bound + 1))
            << a << " " << b << " " << bound;
      }
    }
  }
}

TEST(JoinNames, SeparatesWithCommaSpaceByDefault) {
  EXPECT_EQ(JoinNames({"a", "b", "c"}), "a, b, c");
  EXPECT_EQ(JoinNames({"a", "b"}, " | "), "a | b");
  EXPECT_EQ(JoinNames({}), "");
}

}  // namespace
}  // namespace paritas

namespace paritas {
namespace {

TEST(VisibleText, ShowsControlAndBidiCharactersAsEscapes) {
  EXPECT_EQ(VisibleText("R1\x1b[31m"), "R1\\x1b[31m");
  EXPECT_EQ(VisibleText("a\rb\x7f"), "a\\x0db\\x7f");
  EXPECT_EQ(VisibleText("line\n\tnext"), "line\n\tnext");
  // U+202E RIGHT-TO-LEFT OVERRIDE and U+2066 LEFT-TO-RIGHT ISOLATE.
  EXPECT_EQ(VisibleText("abc\xE2\x80\xAE" "fed"), "abc\\u202efed");
  EXPECT_EQ(VisibleText("\xE2\x81\xA6x"), "\\u2066x");
  // U+0085 NEXT LINE (C1) and bytes that are not UTF-8.
  EXPECT_EQ(VisibleText("a\xC2\x85" "b"), "a\\u0085b");
  EXPECT_EQ(VisibleText("caf\xE9"), "caf\\xe9");
  EXPECT_EQ(VisibleText("\xC0\xAF"), "\\xc0\\xaf");  // overlong '/'
}

TEST(VisibleText, KeepsOrdinaryTextOfAnyScript) {
  const std::string text = "Sk\xC3\xA5ne, \xD0\x9C\xD0\xBE\xD1\x81\xD0\xBA\xD0\xB2\xD0\xB0, \xE6\x9D\xB1\xE4\xBA\xAC";
  EXPECT_EQ(VisibleText(text), text);
}

TEST(AppendShortest, ReadsBackToTheSameDouble) {
  for (double value : {0.1, 1.0 / 3.0, 123.70000000000002, 1e-300, 9.87654321e15, 100.0, -2.5e-8}) {
    std::string text;
    AppendShortest(value, &text);
    double back = 0.0;
    ASSERT_EQ(ParseNumber(text, &back), NumberStatus::kOk) << text;
    EXPECT_EQ(back, value) << text;
  }
  std::string zero;
  AppendShortest(-0.0, &zero);
  EXPECT_EQ(zero, "0");
}

TEST(ParseNumber, ReadsADecimalCommaOnlyWhenAsked) {
  double value = 0.0;
  EXPECT_EQ(ParseNumber(" 11,77 ", &value, ','), NumberStatus::kOk);
  EXPECT_EQ(value, 11.77);
  EXPECT_EQ(ParseNumber("-0,5", &value, ','), NumberStatus::kOk);
  EXPECT_EQ(value, -0.5);
  // Under ',' a point is neither a decimal point nor a thousands separator.
  EXPECT_EQ(ParseNumber("1.200", &value, ','), NumberStatus::kInvalid);
  EXPECT_EQ(ParseNumber("11,77", &value), NumberStatus::kInvalid);
}

TEST(NumberHint, NamesThousandsSeparatorsAndDecimalCommas) {
  EXPECT_EQ(NumberHint("1,200,000", '.', "survey.regions"),
            "thousands separators are not allowed (write 1200000)");
  EXPECT_EQ(NumberHint("-1,200,000.50", '.', "survey.regions"),
            "thousands separators are not allowed (write -1200000.50)");
  EXPECT_EQ(NumberHint("1 200 000", '.', "survey.regions"),
            "thousands separators are not allowed (write 1200000)");
  EXPECT_EQ(NumberHint("1'200", '.', "survey.regions"),
            "thousands separators are not allowed (write 1200)");
  EXPECT_EQ(NumberHint("11,77", '.', "survey.prices"),
            "a decimal comma needs decimal: ',' for this file (survey.prices)");
  EXPECT_EQ(NumberHint("11,77", '.', ""), "a decimal comma is not allowed here (write 11.77)");
  // Three digits after one comma: either reading is possible.
  EXPECT_EQ(NumberHint("1,200", '.', "survey.prices"),
            "thousands separators are not allowed (write 1200), and a decimal comma needs "
            "decimal: ',' for this file (survey.prices)");
  EXPECT_EQ(NumberHint("1.200.000,5", ',', "survey.prices"),
            "thousands separators are not allowed (write 1200000,5)");
  EXPECT_EQ(NumberHint("11.77", ',', "survey.prices"),
            "this file's decimal mark is ',' (survey.prices)");
  EXPECT_EQ(NumberHint("abc", '.', "survey.prices"), "");
  EXPECT_EQ(NumberHint("1,2,3", '.', "survey.prices"), "");
}

TEST(NumberProblem, EndsWithTheHintForTextThatIsNotANumber) {
  EXPECT_EQ(NumberProblem(NumberStatus::kInvalid, "population", "1,200,000", '.', "survey.regions"),
            "population '1,200,000' is not a number; thousands separators are not allowed "
            "(write 1200000)");
  EXPECT_EQ(NumberProblem(NumberStatus::kInvalid, "price", "abc", '.', "survey.prices"),
            "price 'abc' is not a number");
}

TEST(FindInvalidUtf8, FindsTheFirstByteThatIsNotUtf8) {
  EXPECT_EQ(FindInvalidUtf8("plain ascii text, longer than eight bytes"), std::string_view::npos);
  EXPECT_EQ(FindInvalidUtf8("Z\xc3\xbcrich"), std::string_view::npos);  // ü in UTF-8
  EXPECT_EQ(FindInvalidUtf8("Z\xfcrich"), 1u);                          // ü in Latin-1
  EXPECT_EQ(FindInvalidUtf8("twelve bytes\x80"), 12u);                  // after the fast path
  EXPECT_EQ(FindInvalidUtf8("\xc0\xaf"), 0u);                           // overlong '/'
  EXPECT_EQ(FindInvalidUtf8("\xed\xa0\x80"), 0u);                       // a surrogate
  EXPECT_EQ(FindInvalidUtf8("ends inside \xe2\x82"), 12u);              // cut sequence
}

TEST(ValidUtf8, EscapesOnlyTheBytesThatAreNotUtf8) {
  EXPECT_EQ(ValidUtf8("Z\xc3\xbcrich"), "Z\xc3\xbcrich");
  EXPECT_EQ(ValidUtf8("/data/Z\xfcrich.csv"), "/data/Z\\xfcrich.csv");
}

TEST(Utf8Problem, ShowsTheBytesAsEscapesAndNamesTheLikelyEncoding) {
  EXPECT_EQ(Utf8Problem("region", "Z\xfcrich"),
            "region 'Z\\xfcrich' is not valid UTF-8 (the file may be Latin-1 or Windows-1252: "
            "save it as UTF-8)");
}

TEST(QuoteValue, NeverCutsInsideAUtf8Character) {
  // 59 ASCII bytes, then a two-byte character across the 60-byte cut.
  const std::string text = std::string(59, 'a') + "\xc3\xbc" + "tail";
  EXPECT_EQ(QuoteValue(text), "'" + std::string(59, 'a') + "...'");
  EXPECT_EQ(FindInvalidUtf8(QuoteValue(text)), std::string_view::npos);
}

}  // namespace
}  // namespace paritas
