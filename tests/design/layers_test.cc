// The layers of docs/design.md ("Layers"), checked on the sources themselves: which project
// folders and which third-party headers each folder's files may include. A new include that
// breaks a layer fails here, naming the file and line.
#include <gtest/gtest.h>

#include <filesystem>
#include <fstream>
#include <regex>
#include <set>
#include <string>
#include <vector>

namespace chorus {
namespace layers_test {

namespace fs = std::filesystem;

struct Include {
  std::string where;  // "folder/file.cc:12"
  std::string path;   // as written between the quotes or angle brackets
  bool project;       // "..." (a project header) rather than <...>
};

// Every #include of the .h and .cc files directly in `folder` (relative to the source tree).
std::vector<Include> IncludesOf(const std::string& folder) {
  static const std::regex kInclude(R"(^\s*#\s*include\s*([<"])([^>"]+)[>"])");
  std::vector<Include> out;
  for (const fs::directory_entry& e : fs::directory_iterator(fs::path(CHORUS_SOURCE_DIR) / folder)) {
    const std::string ext = e.path().extension().string();
    if (ext != ".h" && ext != ".cc") continue;
    std::ifstream in(e.path());
    std::string line;
    for (int n = 1; std::getline(in, line); ++n) {
      std::smatch m;
      if (std::regex_search(line, m, kInclude)) {
        out.push_back({folder + "/" + e.path().filename().string() + ":" + std::to_string(n),
                       m[2].str(), m[1].str() == "\""});
      }
    }
  }
  return out;
}

// The project folder a header belongs to; protoc's generated headers ("job.pb.h",
// "service.grpc.pb.h", on the include path of proto/'s libraries) belong to proto/.
std::string FolderOf(const std::string& include_path) {
  const size_t slash = include_path.find('/');
  if (slash == std::string::npos && include_path.size() > 5 &&
      include_path.compare(include_path.size() - 5, 5, ".pb.h") == 0) {
    return "proto";
  }
  return include_path.substr(0, slash);
}

bool StartsWithAny(const std::string& s, const std::vector<std::string>& prefixes) {
  for (const std::string& p : prefixes) {
    if (s.rfind(p, 0) == 0) return true;
  }
  return false;
}

struct Layer {
  std::string folder;
  std::set<std::string> may_use;           // project folders its files may include
  std::vector<std::string> never_include;  // third-party header prefixes it must not include
};

// The table of docs/design.md, "Layers".
const std::vector<Layer>& Layers() {
  static const std::vector<Layer> layers = {
      {"common", {"common"},
       {"grpcpp/", "grpc/", "google/protobuf/", "yaml-cpp/", "tbb/", "oneapi/", "nlohmann/", "CLI/"}},
      {"proto", {"common", "proto"}, {"yaml-cpp/", "tbb/", "oneapi/", "nlohmann/", "CLI/"}},
      {"execution", {"common", "execution"},
       {"grpcpp/", "grpc/", "google/protobuf/", "yaml-cpp/", "nlohmann/", "CLI/"}},
      {"report", {"common", "report"},
       {"grpcpp/", "grpc/", "google/protobuf/", "yaml-cpp/", "tbb/", "oneapi/", "CLI/"}},
      {"worker", {"common", "execution", "proto", "worker"}, {"yaml-cpp/", "nlohmann/"}},
      {"coordinator", {"common", "execution", "report", "proto", "coordinator"}, {}},
      {"tools", {"common"}, {"grpcpp/", "grpc/", "google/protobuf/", "yaml-cpp/", "tbb/"}},
  };
  return layers;
}

TEST(LayersTest, EachFolderIncludesOnlyTheFoldersAndLibrariesItsLayerAllows) {
  for (const Layer& layer : Layers()) {
    const std::vector<Include> includes = IncludesOf(layer.folder);
    EXPECT_FALSE(includes.empty()) << layer.folder << ": no sources found";
    for (const Include& inc : includes) {
      if (inc.project) {
        EXPECT_TRUE(layer.may_use.count(FolderOf(inc.path)) == 1)
            << inc.where << ": includes \"" << inc.path << "\"; " << layer.folder
            << "/ may use only the folders docs/design.md's layer table names";
      } else {
        EXPECT_FALSE(StartsWithAny(inc.path, layer.never_include))
            << inc.where << ": includes <" << inc.path << ">, which " << layer.folder
            << "/ must not use";
      }
    }
  }
}

TEST(LayersTest, OnlyTheConfigLoaderIncludesYamlCpp) {
  for (const Layer& layer : Layers()) {
    for (const Include& inc : IncludesOf(layer.folder)) {
      if (!inc.project && inc.path.rfind("yaml-cpp/", 0) == 0) {
        EXPECT_EQ(inc.where.substr(0, inc.where.find(':')), "coordinator/config_loader.cc")
            << inc.where;
      }
    }
  }
}

// The report model (what report.json holds) knows nothing of its rendering.
TEST(LayersTest, TheReportModelIncludesNoOtherReportFile) {
  for (const Include& inc : IncludesOf("report")) {
    if (inc.where.rfind("report/report_model.", 0) != 0 || !inc.project) continue;
    EXPECT_TRUE(inc.path == "report/report_model.h" || FolderOf(inc.path) != "report") << inc.where;
  }
}

}  // namespace layers_test
}  // namespace chorus
