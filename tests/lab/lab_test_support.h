// Helpers of the lab tests: a bench database filled by real simulated runs
// through the command line, and the PostgreSQL server the suite shares.
#pragma once

#include <fstream>
#include <memory>
#include <string>

#include <fmt/format.h>
#include <gtest/gtest.h>

#include "rig/sqlite.h"
#include "tests/support/fixtures.h"
#include "tests/support/pg_server.h"
#include "tests/support/test_support.h"

namespace kp::lab::testing {

// The server every test of the suite uses (each test makes its own database
// on it); started on first use, stopped and removed at exit. A server that
// cannot start fails the test that asked for it, with the reason.
inline kp::testing::PgServer& SharedServer() {
  static std::unique_ptr<kp::testing::PgServer> server;
  if (!server) {
    auto s = kp::testing::PgServer::Start();
    if (!s.ok()) {
      ADD_FAILURE() << s.status().ToString();
      std::abort();
    }
    server = std::move(*s);
  }
  return *server;
}

// A short charge and a 1 s-sampled discharge to the cutoff from 60 % on the
// simulator (about 2,000 samples), in virtual time.
inline constexpr const char* kLabProcedure =
    "name \"lab check\"\n"
    "cell li-ion rated=2500mAh nominal=3.6V max=4.2V cutoff=2.75V max-temp=60degC\n"
    "charge 1C to 4.2V until time>=5min every=10s\n"
    "rest 2min every=30s\n"
    "discharge 1C until voltage<=2.75V every=1s\n";

class Bench {
 public:
  Bench() : path_(dir_.File("bench.db")) {}
  // `n` runs of kLabProcedure on bench `name`.
  void Run(const std::string& name, int n) {
    const std::string proc = dir_.File("lab.kpp");
    std::ofstream(proc) << kLabProcedure;
    for (int i = 0; i < n; ++i) {
      const int code = kp::testing::RunKneepoint({"run", proc, "--rig", "sim", "--db", path_, "--sim-soc", "60%", "--bench", name,
                                                  "--cell", fmt::format("{}-cell-{}", name, ++runs_), "--tag", "lab",
                                                  "--serial", fmt::format("SN-{}", runs_)});
      ASSERT_EQ(code, 0);
    }
    db_.reset();
  }
  const std::string& path() const { return path_; }
  sql::Db& db() {
    if (!db_) {
      auto d = sql::Db::Open(path_, false, true);
      EXPECT_TRUE(d.ok());
      db_ = std::move(*d);
    }
    return *db_;
  }
  const kp::testing::TempDir& dir() const { return dir_; }

 private:
  kp::testing::TempDir dir_;
  std::string path_;
  std::unique_ptr<sql::Db> db_;
  int runs_ = 0;
};

inline int64_t Count(sql::Db& db, const std::string& query) {
  auto q = db.Prepare(query);
  EXPECT_TRUE(q.ok()) << query;
  if (!q.ok()) return -1;
  auto row = q->Step();
  if (!row.ok() || !*row) return -1;
  return q->Int(0);
}

}  // namespace kp::lab::testing
