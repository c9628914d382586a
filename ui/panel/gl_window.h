// GlWindow: one GLFW window with an OpenGL 3.3 core context and Dear ImGui
// (GLFW + OpenGL3 backends) set up on it. Owns the ImGui context. The frame
// loop stays with the caller: BeginFrame / (ImGui calls) / EndFrame. UI thread only.
#pragma once

#include <memory>
#include <string>
#include <vector>

#include "drivers/status.h"

struct GLFWwindow;

namespace kp::ui {

class GlWindow {
 public:
  struct Options {
    int width = 1600;
    int height = 1000;
    std::string title = "Kneepoint";
    bool vsync = true;
  };
  static Result<std::unique_ptr<GlWindow>> Open(const Options& options);
  ~GlWindow();

  // Monitor content scale (1.0 on a plain 96-dpi screen), for font sizes.
  float ContentScale() const;
  bool ShouldClose() const;
  // Waits for input at most `timeout_s` (0 = just poll).
  void WaitEvents(double timeout_s);
  // Ends a WaitEvents early; callable from any thread (the feed's worker).
  static void Wake();
  void BeginFrame();
  // Renders ImGui's draw data. Split so a benchmark can time the parts:
  // Render() builds the draw lists, Rasterise() draws them, Present() swaps.
  void Render();
  void Rasterise();
  void Present();
  // Reads the back buffer after Rasterise (RGB, top row first).
  std::vector<unsigned char> ReadPixels(int* width, int* height);
  // Writes ReadPixels() to a PNG file.
  Status SavePng(const std::string& path);

 private:
  explicit GlWindow(GLFWwindow* w) : window_(w) {}
  GLFWwindow* window_;
};

}  // namespace kp::ui
