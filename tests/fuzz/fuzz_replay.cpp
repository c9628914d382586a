// Replays a fuzz corpus through one fuzz entry point, with any compiler:
// `<target>_replay DIR...` (one executable per target, linked with its entry
// point). A crash or sanitizer report fails the test; exit 0 when every file
// went through and at least one was found.
#include <cstdint>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <iterator>
#include <vector>

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size);

int main(int argc, char** argv) {
  int files = 0;
  for (int i = 1; i < argc; ++i) {
    for (const auto& entry : std::filesystem::directory_iterator(argv[i])) {
      if (!entry.is_regular_file()) continue;
      std::ifstream in(entry.path(), std::ios::binary);
      std::vector<char> bytes((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
      // Every prefix as well: truncated files are the commonest malformed input.
      for (size_t n = 0; n <= bytes.size(); n += 1 + bytes.size() / 64)
        LLVMFuzzerTestOneInput(reinterpret_cast<const uint8_t*>(bytes.data()), n);
      LLVMFuzzerTestOneInput(reinterpret_cast<const uint8_t*>(bytes.data()), bytes.size());
      ++files;
    }
  }
  std::printf("replayed %d files\n", files);
  return files > 0 ? 0 : 1;
}
