// Discovery on a fake sysfs tree: serial ports labelled by their bus, USB-TMC
// devices by their USB identity, each asked *IDN? (the usbtmc one answered by
// the simulated load through a fake device), and the printed rig-file lines
// read back by the rig-file parser. LAN discovery (a VXI-11 broadcast) needs
// a network with instruments and is not exercised here.
#include "rig/discovery.h"

#include <gtest/gtest.h>

#include <fstream>

#include "drivers/sim/sim_bench.h"
#include "rig/rig_file.h"
#include "tests/support/fake_sysfs.h"
#include "tests/support/fake_usbtmc.h"
#include "tests/support/fixtures.h"
#include "tests/support/test_support.h"

namespace kp {
namespace {

namespace fs = std::filesystem;

TEST(Discovery, LocalInstrumentsWithIdentityAndPasteableLines) {
  testing::FakeSysfs f;
  fs::path adapter = f.UsbDevice("usb1/1-1", "0403", "6001", "A12345", "FT232R USB UART");
  f.UsbSerialPort("ttyUSB0", adapter, "usb-FTDI_FT232R_USB_UART_A12345-if00-port0");
  fs::path load_dev = f.UsbDevice("usb1/1-2", "1ab1", "0e11", "LD0042", "Sim Load");
  f.Usbtmc("usbtmc0", load_dev, "1-2:1.0", 0);

  std::vector<FoundInstrument> found = DiscoverLocal(f.roots());
  ASSERT_EQ(found.size(), 2u);
  EXPECT_EQ(found[0].kind, "serial");
  EXPECT_EQ(found[0].address, "serial:" + (f.dev() / "serial" / "by-id" / "usb-FTDI_FT232R_USB_UART_A12345-if00-port0").string())
      << "the by-id name survives re-plugging";
  EXPECT_EQ(found[0].path_address, "serial:" + (f.dev() / "ttyUSB0").string());
  EXPECT_NE(found[0].description.find("usb 0403:6001"), std::string::npos) << found[0].description;
  EXPECT_EQ(found[1].kind, "usbtmc");
  EXPECT_EQ(found[1].address, "USB0::0x1AB1::0x0E11::LD0042::INSTR");
  EXPECT_EQ(found[1].path_address, "usbtmc:" + (f.dev() / "usbtmc0").string());

  VirtualClock clock;
  sim::SimBench bench(sim::DemoLiIonCell(2.56), clock);
  testing::FakeUsbtmcPeer peer(bench.load());
  StreamOptions so;
  so.usbtmc.open = peer.Opener();
  so.usbtmc.sysfs = f.roots();
  IdentifyInstrument(found[1], Seconds(0.5), so);
  EXPECT_EQ(found[1].identity, "Kneepoint Simulation,KP-SIM-LOAD,SN0001,1.0") << found[1].error;
  EXPECT_FALSE(found[1].dialect.empty());
  EXPECT_TRUE(found[1].dialect.starts_with("kneepoint-sim")) << found[1].dialect;
  // The serial port has nothing behind it here: the failure is reported, not fatal.
  IdentifyInstrument(found[0], Seconds(0.1), so);
  EXPECT_TRUE(found[0].identity.empty());
  EXPECT_FALSE(found[0].error.empty());

  std::string lines = RigFileLines(found[1], "load");
  EXPECT_NE(lines.find("address = \"USB0::0x1AB1::0x0E11::LD0042::INSTR\""), std::string::npos) << lines;
  EXPECT_NE(lines.find("# *IDN? Kneepoint Simulation,KP-SIM-LOAD"), std::string::npos) << lines;
  std::string rig = "[bench]\nname = \"found\"\n\n" + lines;
  testing::TempDir dir;
  std::string path = dir.File("found.toml");
  std::ofstream(path) << rig;
  Result<RigFileSpec> spec = LoadRigFile(path);
  ASSERT_TRUE(spec.ok()) << spec.status().ToString() << "\n" << rig;
  ASSERT_EQ(spec->instruments.size(), 1u);
  EXPECT_EQ(spec->instruments[0].address, "USB0::0x1AB1::0x0E11::LD0042::INSTR");
  EXPECT_EQ(spec->instruments[0].profile_ref, found[1].dialect);
  // The adapter nobody answered on gets a placeholder dialect to replace.
  EXPECT_NE(RigFileLines(found[0], "adapter").find("choose or write one"), std::string::npos);
}

TEST(Discovery, PortsCommandLabelsByBus) {
  testing::FakeSysfs f;
  fs::path adapter = f.UsbDevice("usb1/1-1", "0403", "6001", "A12345", "FT232R USB UART");
  f.UsbSerialPort("ttyUSB0", adapter, "usb-FTDI_FT232R_USB_UART_A12345-if00-port0");
  ::testing::internal::CaptureStdout();
  int rc = testing::RunKneepoint({"ports", "--sysfs-root", f.sys().string(), "--dev-root", f.dev().string()});
  std::string text = ::testing::internal::GetCapturedStdout();
  EXPECT_EQ(rc, 0);
  EXPECT_NE(text.find("usb 0403:6001 Example Instruments FT232R USB UART (serial A12345) [ftdi_sio]"), std::string::npos) << text;
  EXPECT_NE(text.find("usb-FTDI_FT232R_USB_UART_A12345-if00-port0"), std::string::npos) << text;
}

TEST(Discovery, DiscoverCommandPrintsInstrumentBlocks) {
  testing::FakeSysfs f;
  fs::path load_dev = f.UsbDevice("usb1/1-2", "1ab1", "0e11", "LD0042", "Sim Load");
  f.Usbtmc("usbtmc0", load_dev, "1-2:1.0", 0);
  ::testing::internal::CaptureStdout();
  int rc = testing::RunKneepoint({"discover", "--no-lan", "--sysfs-root", f.sys().string(), "--dev-root", f.dev().string()});
  std::string text = ::testing::internal::GetCapturedStdout();
  EXPECT_EQ(rc, 0);
  EXPECT_NE(text.find("[[instrument]]\nname = \"usbtmc 1\"\naddress = \"USB0::0x1AB1::0x0E11::LD0042::INSTR\""), std::string::npos)
      << text;
  EXPECT_NE(text.find("add --identify"), std::string::npos) << text;
}

}  // namespace
}  // namespace kp
