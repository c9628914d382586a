// The web view's JSON API over a lab database filled by a real sync, and the
// HTTP server's rules: GET only, a token when one is set, loopback unless a
// token is set, and a page that loads nothing from elsewhere.
#include <gtest/gtest.h>

#include <httplib.h>

#include <atomic>
#include <future>
#include <thread>

#include <nlohmann/json.hpp>

#include "ui/web/lab_server.h"
#include "rig/lab/lab_sync.h"
#include "ui/web/lab_web.h"
#include "rig/lab/pg.h"
#include "ui/report/run_report.h"
#include "rig/store.h"
#include "tests/lab/lab_test_support.h"

namespace kp {
namespace {

using json = nlohmann::json;
using lab::testing::Bench;
using lab::testing::SharedServer;

class LabApi : public ::testing::Test {
 protected:
  void SetUp() override {
    bench_.Run("bench W", 2);
    // A third run still going on: 300 samples logged so far.
    {
      SteadyClock wall;
      auto store = Store::Open(bench_.path(), wall);
      ASSERT_TRUE(store.ok());
      NewRun nr;
      nr.cell_name = "live-cell";
      nr.chemistry = "li-ion";
      nr.rated_mah = 2500;
      nr.procedure_name = "soak";
      nr.procedure_text = "cell li-ion";
      nr.rig = "sim";
      nr.bench = "bench L";
      auto id = (*store)->BeginRun(nr);
      ASSERT_TRUE(id.ok());
      for (int i = 0; i < 300; ++i) ASSERT_OK((*store)->AppendSample(*id, Sample{i * 1.0, 4.0 - i * 0.001, 1.25, 24.0, 0}));
      ASSERT_OK((*store)->Commit());
      live_uuid_ = (*store)->GetRun(*id)->uuid;
    }
    auto url = SharedServer().NewDatabase();
    ASSERT_TRUE(url.ok());
    url_ = *url;
    auto st = lab::SyncOnce(bench_.path(), url_);
    ASSERT_TRUE(st.ok()) << st.status().ToString();
  }
  json Get(const std::string& path, lab::LabWeb::Params p = {}, int want = 200) {
    lab::LabWeb web(url_);
    auto r = web.Get(path, p);
    EXPECT_EQ(r.status, want) << path << ": " << r.body;
    EXPECT_EQ(r.content_type, "application/json");
    return json::parse(r.body);
  }
  Bench bench_;
  std::string url_, live_uuid_;
};

TEST_F(LabApi, RunListWithFilters) {
  json all = Get("/api/runs");
  EXPECT_EQ(all.at("schema_version"), 1);
  EXPECT_EQ(all.at("total"), 3);
  ASSERT_EQ(all.at("runs").size(), 3u);
  for (const json& r : all.at("runs")) {
    EXPECT_TRUE(r.at("uuid").is_string());
    EXPECT_TRUE(r.contains("verdict"));
  }
  json done = Get("/api/runs", {{"outcome", "completed"}});
  EXPECT_EQ(done.at("total"), 2);
  for (const json& r : done.at("runs")) {
    EXPECT_EQ(r.at("bench"), "bench W");
    EXPECT_TRUE(r.at("verdict").is_string());  // recorded when the run ended
  }
  EXPECT_EQ(Get("/api/runs", {{"bench", "BENCH w"}}).at("total"), 2);  // case-insensitive
  EXPECT_EQ(Get("/api/runs", {{"bench", "bench ?"}}).at("total"), 3);
  EXPECT_EQ(Get("/api/runs", {{"serial", "SN-2"}}).at("total"), 1);
  EXPECT_EQ(Get("/api/runs", {{"text", "live-c"}}).at("total"), 1);
  EXPECT_EQ(Get("/api/runs", {{"tag", "lab"}}).at("total"), 2);
  EXPECT_EQ(Get("/api/runs", {{"text", "100%_"}}).at("total"), 0);  // LIKE wildcards are plain text here
  json page = Get("/api/runs", {{"limit", "1"}, {"offset", "1"}});
  EXPECT_EQ(page.at("total"), 3);
  EXPECT_EQ(page.at("runs").size(), 1u);
  // Any text comes back as the same text (JSON escaping of quotes, controls, non-ASCII).
  {
    auto c = pg::PgConn::Connect(url_);
    ASSERT_TRUE(c.ok());
    ASSERT_OK((*c)->Exec("UPDATE kneepoint.runs SET cell = E'odd \"cell\"\\\\\n\t\u00e9 \x01' WHERE bench = 'bench L'"));
    json odd = Get("/api/runs", {{"bench", "bench L"}});
    ASSERT_EQ(odd.at("runs").size(), 1u);
    EXPECT_EQ(odd.at("runs").at(0).at("cell"), "odd \"cell\"\\\n\t\u00e9 \x01");
  }
  Get("/api/runs", {{"outcome", "finished"}}, 400);
  Get("/api/runs", {{"limit", "0"}}, 400);
  Get("/api/runs", {{"limit", "12abc"}}, 400);
}

TEST_F(LabApi, LiveChannelsShowTheLatestSample) {
  json live = Get("/api/live");
  ASSERT_EQ(live.at("running").size(), 1u);
  const json& r = live.at("running").at(0);
  EXPECT_EQ(r.at("uuid"), live_uuid_);
  EXPECT_EQ(r.at("bench"), "bench L");
  EXPECT_EQ(r.at("seq"), 299);
  EXPECT_DOUBLE_EQ(r.at("voltage_v").get<double>(), 4.0 - 299 * 0.001);
  EXPECT_DOUBLE_EQ(r.at("current_a").get<double>(), 1.25);
}

TEST_F(LabApi, OneRunsFiguresAreTheBenchReport) {
  json list = Get("/api/runs", {{"outcome", "completed"}});
  for (const json& row : list.at("runs")) {
    const std::string uuid = row.at("uuid");
    json got = Get("/api/runs/" + uuid);
    SteadyClock wall;
    auto store = Store::Open(bench_.path(), wall);
    ASSERT_TRUE(store.ok());
    auto id = (*store)->ResolveRun(uuid);
    ASSERT_TRUE(id.ok());
    auto rep = BuildRunReport(**store, *id);
    ASSERT_TRUE(rep.ok());
    json want = RunReportJson(*rep);
    // The copy numbers its runs by start; the figures are the same.
    want["run"] = got.at("report").at("run");
    want["run_record"]["id"] = got.at("report").at("run_record").at("id");
    EXPECT_EQ(got.at("report"), want) << json::diff(want, got.at("report")).dump(1);
  }
  Get("/api/runs/0b6d3c56-33a5-4f4e-9a53-4b2b4f1c7a10", {}, 404);
  Get("/api/runs/not-a-uuid", {}, 400);
  Get("/api/nothing-here", {}, 404);
}

TEST_F(LabApi, SamplesDecimatedAndIncremental) {
  json d = Get("/api/runs/" + live_uuid_ + "/samples", {{"width", "7"}});
  EXPECT_EQ(d.at("samples_total"), 300);
  EXPECT_EQ(d.at("per_bucket"), 43);  // ceil(300 / 7)
  const json& b = d.at("buckets");
  ASSERT_EQ(b.size(), 7u);
  EXPECT_EQ(b.at(0).at(0), 0);
  EXPECT_EQ(b.at(1).at(0), 43);
  for (const json& x : b) EXPECT_LE(x.at(3).get<double>(), x.at(4).get<double>());
  EXPECT_DOUBLE_EQ(b.at(0).at(4).get<double>(), 4.0);            // max voltage of the first bucket: the first sample
  EXPECT_DOUBLE_EQ(b.at(0).at(3).get<double>(), 4.0 - 42 * 0.001);  // min: its last
  json inc = Get("/api/runs/" + live_uuid_ + "/samples", {{"since", "289"}});
  ASSERT_EQ(inc.at("samples").size(), 10u);
  EXPECT_EQ(inc.at("samples").at(0).at(0), 290);
  EXPECT_EQ(inc.at("next_since"), 299);
  json none = Get("/api/runs/" + live_uuid_ + "/samples", {{"since", "299"}});
  EXPECT_TRUE(none.at("samples").empty());
  EXPECT_EQ(none.at("next_since"), 299);
  json first = Get("/api/runs/" + live_uuid_ + "/samples", {{"since", "-1"}, {"limit", "5"}});
  EXPECT_EQ(first.at("samples").size(), 5u);
  Get("/api/runs/" + live_uuid_ + "/samples", {}, 400);
}

TEST(LabPage, IsSelfContained) {
  const std::string& page = lab::LabWeb::Page();
  EXPECT_NE(page.find("Running now"), std::string::npos);
  for (const char* outside : {"http://", "https://", "<script src", "<link", "@import", "url(", "@font-face", "//cdn"})
    EXPECT_EQ(page.find(outside), std::string::npos) << outside;
  EXPECT_EQ(page.find("innerHTML"), std::string::npos);  // database text only ever set as text
}

class Served {
 public:
  explicit Served(lab::ServeOptions o) {
    std::promise<int> bound;
    auto port = bound.get_future();
    thread_ = std::thread([this, o, &bound] {
      bool told = false;
      status_ = lab::Serve(o, &stop_, [&](int p) {
        told = true;
        bound.set_value(p);
      });
      if (!told) bound.set_value(-1);  // only before the constructor stopped waiting
    });
    port_ = port.get();
  }
  ~Served() {
    stop_ = true;
    thread_.join();
  }
  int port() const { return port_; }
  const Status& status() const { return status_; }

 private:
  std::atomic<bool> stop_{false};
  std::thread thread_;
  int port_ = -1;
  Status status_ = Status::Ok();
};

TEST_F(LabApi, ServerIsReadOnlyAndKeepsItsToken) {
  lab::ServeOptions o;
  o.db_url = url_;
  o.port = 0;
  o.token = "s3cret-token";
  Served s(o);
  ASSERT_GT(s.port(), 0) << s.status().ToString();
  httplib::Client c("127.0.0.1", s.port());
  auto none = c.Get("/api/runs");
  ASSERT_TRUE(none);
  EXPECT_EQ(none->status, 401);
  httplib::Headers auth = {{"Authorization", "Bearer s3cret-token"}};
  auto runs = c.Get("/api/runs", auth);
  ASSERT_TRUE(runs);
  EXPECT_EQ(runs->status, 200);
  EXPECT_EQ(json::parse(runs->body).at("total"), 3);
  auto wrong = c.Get("/api/runs", {{"Authorization", "Bearer s3cret-tokeN"}});
  ASSERT_TRUE(wrong);
  EXPECT_EQ(wrong->status, 401);
  auto page = c.Get("/?token=s3cret-token");
  ASSERT_TRUE(page);
  EXPECT_EQ(page->status, 200);
  EXPECT_NE(page->body.find("Kneepoint lab"), std::string::npos);
  auto post = c.Post("/api/runs", auth, "{}", "application/json");
  ASSERT_TRUE(post);
  EXPECT_EQ(post->status, 405);
  auto del = c.Delete("/api/runs/" + live_uuid_, auth);
  ASSERT_TRUE(del);
  EXPECT_EQ(del->status, 405);
}

TEST(LabServe, RefusesToListenBeyondLoopbackWithoutAToken) {
  std::atomic<bool> stop{true};
  lab::ServeOptions o;
  o.db_url = "postgresql:///nowhere";
  o.host = "0.0.0.0";
  Status st = lab::Serve(o, &stop, nullptr);
  ASSERT_FALSE(st.ok());
  EXPECT_NE(st.message().find("token"), std::string::npos) << st.ToString();
  std::string host;
  int port = 0;
  ASSERT_OK(lab::ParseListen("[::1]:8081", host, port));
  EXPECT_EQ(host, "::1");
  EXPECT_EQ(port, 8081);
  EXPECT_TRUE(lab::IsLoopbackHost(host));
  EXPECT_FALSE(lab::ParseListen("127.0.0.1", host, port).ok());
  EXPECT_FALSE(lab::ParseListen("127.0.0.1:99999", host, port).ok());
  EXPECT_FALSE(lab::IsLoopbackHost("10.0.0.5"));
}

}  // namespace
}  // namespace kp
