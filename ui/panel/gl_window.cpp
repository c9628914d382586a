#include "ui/panel/gl_window.h"

#define GLFW_INCLUDE_NONE
#include <GLFW/glfw3.h>
#include <GL/gl.h>
#include <imgui.h>
#include <backends/imgui_impl_glfw.h>
#include <backends/imgui_impl_opengl3.h>
#include <stb_image_write.h>

#include <algorithm>
#include <memory>

namespace kp::ui {

Result<std::unique_ptr<GlWindow>> GlWindow::Open(const Options& options) {
  if (!glfwInit()) return Unavailable("cannot open a window (no display? under a headless shell use xvfb-run)");
  glfwWindowHint(GLFW_CONTEXT_VERSION_MAJOR, 3);
  glfwWindowHint(GLFW_CONTEXT_VERSION_MINOR, 3);
  glfwWindowHint(GLFW_OPENGL_PROFILE, GLFW_OPENGL_CORE_PROFILE);
  glfwWindowHint(GLFW_SCALE_TO_MONITOR, GLFW_TRUE);
  GLFWwindow* w = glfwCreateWindow(options.width, options.height, options.title.c_str(), nullptr, nullptr);
  if (!w) {
    glfwTerminate();
    return Unavailable("cannot create an OpenGL 3.3 window");
  }
  glfwMakeContextCurrent(w);
  glfwSwapInterval(options.vsync ? 1 : 0);
  IMGUI_CHECKVERSION();
  ImGui::CreateContext();
  ImGui::GetIO().IniFilename = nullptr;  // the panel keeps no layout file
  ImGui_ImplGlfw_InitForOpenGL(w, true);
  ImGui_ImplOpenGL3_Init("#version 330 core");
  return std::unique_ptr<GlWindow>(new GlWindow(w));
}

GlWindow::~GlWindow() {
  ImGui_ImplOpenGL3_Shutdown();
  ImGui_ImplGlfw_Shutdown();
  ImGui::DestroyContext();
  glfwDestroyWindow(window_);
  glfwTerminate();
}

float GlWindow::ContentScale() const {
  float sx = 1.0f, sy = 1.0f;
  glfwGetWindowContentScale(window_, &sx, &sy);
  return sx > 0.5f ? sx : 1.0f;
}

bool GlWindow::ShouldClose() const { return glfwWindowShouldClose(window_); }

void GlWindow::WaitEvents(double timeout_s) {
  if (timeout_s > 0)
    glfwWaitEventsTimeout(timeout_s);
  else
    glfwPollEvents();
}

void GlWindow::Wake() { glfwPostEmptyEvent(); }

void GlWindow::BeginFrame() {
  ImGui_ImplOpenGL3_NewFrame();
  ImGui_ImplGlfw_NewFrame();
  ImGui::NewFrame();
}

void GlWindow::Render() { ImGui::Render(); }

void GlWindow::Rasterise() {
  int w = 0, h = 0;
  glfwGetFramebufferSize(window_, &w, &h);
  glViewport(0, 0, w, h);
  ImVec4 bg = ImGui::GetStyle().Colors[ImGuiCol_WindowBg];
  glClearColor(bg.x, bg.y, bg.z, 1.0f);
  glClear(GL_COLOR_BUFFER_BIT);
  ImGui_ImplOpenGL3_RenderDrawData(ImGui::GetDrawData());
  glFinish();
}

void GlWindow::Present() { glfwSwapBuffers(window_); }

std::vector<unsigned char> GlWindow::ReadPixels(int* width, int* height) {
  glfwGetFramebufferSize(window_, width, height);
  std::vector<unsigned char> px(static_cast<size_t>(*width) * static_cast<size_t>(*height) * 3);
  glPixelStorei(GL_PACK_ALIGNMENT, 1);
  glReadBuffer(GL_BACK);
  glReadPixels(0, 0, *width, *height, GL_RGB, GL_UNSIGNED_BYTE, px.data());
  // GL's origin is the bottom-left corner: flip rows.
  size_t row = static_cast<size_t>(*width) * 3;
  for (int y = 0; y < *height / 2; ++y)
    std::swap_ranges(px.begin() + static_cast<ptrdiff_t>(y * row), px.begin() + static_cast<ptrdiff_t>((y + 1) * row),
                     px.begin() + static_cast<ptrdiff_t>((*height - 1 - y) * row));
  return px;
}

Status GlWindow::SavePng(const std::string& path) {
  int w = 0, h = 0;
  std::vector<unsigned char> px = ReadPixels(&w, &h);
  if (!stbi_write_png(path.c_str(), w, h, 3, px.data(), w * 3)) return IoError("cannot write " + path);
  return Status::Ok();
}

}  // namespace kp::ui
