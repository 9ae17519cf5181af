// `dropfit plan` as a command (cli/run_plan.h): the files it writes and their fields
// (docs/formats.md, "plan.json"), and a self-contained page.

#include "cli/run_plan.h"

#include <gtest/gtest.h>

#include <nlohmann/json.hpp>

#include <fstream>
#include <sstream>

#include "tests/support/quiet_logs.h"
#include "tests/support/temp_dir.h"

namespace dropfit::cli {
namespace {

const bool kQuietCeres = [] {
  test::SilenceCeresLogs();
  return true;
}();

std::string ReadFile(const std::filesystem::path& p) {
  std::ifstream in(p);
  std::stringstream s;
  s << in.rdbuf();
  return s.str();
}

TEST(RunPlan, WritesPlanJsonWithEverySettingAndASelfContainedPage) {
  test::TempDir dir("run_plan");
  PlanCommandOptions o;
  o.plan.heights_m = {0.15, 0.3};
  o.plan.rates = {"500", "2000:1280x512"};
  o.plan.realisations = 4;
  o.plan.threads = 1;
  o.out_dir = (dir.path() / "out").string();
  std::ostringstream out, err;
  ASSERT_EQ(RunPlan(o, out, err), 0) << err.str();
  EXPECT_TRUE(err.str().empty());  // no progress when err is not a terminal
  EXPECT_NE(out.str().find("cheapest setting"), std::string::npos) << out.str();

  const nlohmann::json j = nlohmann::json::parse(ReadFile(dir.path() / "out" / "plan.json"));
  EXPECT_EQ(j["tool"], "dropfit plan");
  EXPECT_EQ(j["specimen"]["law"], "hertz");
  ASSERT_EQ(j["settings"].size(), 2u);
  const auto& s = j["settings"][0];
  EXPECT_EQ(s["fps"], 500.0);
  ASSERT_EQ(s["heights"].size(), 2u);
  for (const char* key : {"cor", "contact_duration_s", "max_deflection_m", "stiffness", "damping"}) {
    EXPECT_TRUE(s["heights"][0][key].contains("sd")) << key;
    EXPECT_TRUE(s["heights"][0][key].contains("sd_repeats")) << key;
  }
  EXPECT_TRUE(j["chosen"].is_number());

  const std::string html = ReadFile(dir.path() / "out" / "plan.html");
  EXPECT_NE(html.find("<svg"), std::string::npos);
  // Self-contained: no external script, style sheet or image (the SVG namespace is no fetch).
  EXPECT_EQ(html.find("src="), std::string::npos);
  EXPECT_EQ(html.find("<link"), std::string::npos);
}

TEST(RunPlan, RefusesBadOptionsWritingNothing) {
  test::TempDir dir("run_plan_bad");
  PlanCommandOptions o;
  o.plan.expected_cor = 1.5;
  o.out_dir = (dir.path() / "out").string();
  std::ostringstream out, err;
  EXPECT_EQ(RunPlan(o, out, err), 2);
  EXPECT_NE(err.str().find("--cor"), std::string::npos);
  EXPECT_FALSE(std::filesystem::exists(dir.path() / "out"));
}

}  // namespace
}  // namespace dropfit::cli
