// SHA-256 against the FIPS 180-2 appendix examples (also NIST's "SHA256.pdf" example values):
// "abc", the 448-bit two-block message, and one million 'a'.
#include "indexer/base/sha256.h"

#include <gtest/gtest.h>

#include <cstdio>
#include <string>

namespace sightfix {
namespace {

TEST(Sha256Test, FipsExamples) {
  // FIPS 180-2 Appendix B.1
  EXPECT_EQ(Sha256Hex("abc", 3),
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
  // FIPS 180-2 Appendix B.2
  const std::string two = "abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq";
  EXPECT_EQ(Sha256Hex(two.data(), two.size()),
            "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1");
  // FIPS 180-2 Appendix B.3
  const std::string million(1000000, 'a');
  EXPECT_EQ(Sha256Hex(million.data(), million.size()),
            "cdc76e5c9914fb9281a1c7e284d73e67f1809a48a497200e046d39ccc7112cd0");
  // Empty message (common practice: the well-known digest of zero bytes)
  EXPECT_EQ(Sha256Hex("", 0), "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855");
}

TEST(Sha256Test, FileMatchesBytes) {
  const std::string path = ::testing::TempDir() + "/sha_test.bin";
  std::FILE* f = std::fopen(path.c_str(), "wb");
  ASSERT_NE(f, nullptr);
  std::fputs("abc", f);
  std::fclose(f);
  auto h = Sha256OfFile(path);
  ASSERT_TRUE(h.ok());
  EXPECT_EQ(*h, Sha256Hex("abc", 3));
  EXPECT_EQ(Sha256OfFile(path + ".none").status().code(), StatusCode::kNotFound);
}

}  // namespace
}  // namespace sightfix
