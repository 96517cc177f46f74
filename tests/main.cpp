#define CATCH_CONFIG_RUNNER
#include <glog/logging.h>

#include <catch2/catch.hpp>

int main(int argc, char* argv[]) {
  // Ceres reports through glog; the library turns failures into flags.
  FLAGS_minloglevel = google::GLOG_FATAL;
  return Catch::Session().run(argc, argv);
}
