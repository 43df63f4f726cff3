// The job spec on the wire (proto/spec_codec.h): train.products survives the round trip, a spec
// from a coordinator that predates the field trains with fp32 products, and an unknown precision
// is refused.
#include "proto/spec_codec.h"

#include <gtest/gtest.h>

namespace chorus {
namespace spec_codec_test {

MemberSpec SmallSpec() {
  MemberSpec spec;
  spec.index = 2;
  spec.seed = 99;
  spec.model.hidden = {8};
  return spec;
}

TEST(SpecCodecTest, ProductPrecisionRoundTripsAndDefaultsToFp32) {
  MemberSpec spec = SmallSpec();
  spec.train.products = ProductPrecision::kBf16;
  wire::MemberSpec w;
  SpecToWire(spec, &w);
  EXPECT_EQ(w.products(), "bf16");
  StatusOr<MemberSpec> back = SpecFromWire(w);
  ASSERT_TRUE(back.ok()) << back.status().ToString();
  EXPECT_EQ(back.value().train.products, ProductPrecision::kBf16);
  EXPECT_EQ(back.value().seed, 99u);

  w.clear_products();  // as an older coordinator sends it
  back = SpecFromWire(w);
  ASSERT_TRUE(back.ok()) << back.status().ToString();
  EXPECT_EQ(back.value().train.products, ProductPrecision::kFp32);

  w.set_products("fp8");
  back = SpecFromWire(w);
  ASSERT_FALSE(back.ok());
  EXPECT_NE(back.status().message().find("products"), std::string::npos) << back.status().ToString();
}

}  // namespace spec_codec_test
}  // namespace chorus
