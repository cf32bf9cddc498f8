#include "io/hdf5_reader.h"

#include <algorithm>
#include <cctype>
#include <filesystem>
#include <vector>

#include "io/input_guard.h"
#include "retrieval/error.h"

#ifdef STREAKWRIGHT_HAVE_HDF5
#include <H5Cpp.h>
#endif

namespace sw {

bool hdf5_available() {
#ifdef STREAKWRIGHT_HAVE_HDF5
  return true;
#else
  return false;
#endif
}

bool split_hdf5_reference(const std::string& ref, std::string* file, std::string* dataset) {
  static const char* const kExtensions[] = {".h5:", ".hdf5:", ".he5:", ".nxs:"};
  std::string lower = ref;
  std::transform(lower.begin(), lower.end(), lower.begin(),
                 [](unsigned char c) { return static_cast<char>(std::tolower(c)); });
  for (const char* ext : kExtensions) {
    const std::string e(ext);
    const auto p = lower.find(e);
    if (p == std::string::npos) continue;
    const std::size_t colon = p + e.size() - 1;
    *file = ref.substr(0, colon);
    *dataset = ref.substr(colon + 1);
    return true;
  }
  return false;
}

Eigen::MatrixXd read_hdf5_matrix(const std::string& file, const std::string& dataset,
                                 const std::string& where) {
  const std::string what = where + ": image '" + file + ":" + dataset + "'";
  if (dataset.empty() || dataset.front() != '/')
    throw input_error(what +
                      ": expected an absolute dataset path after the colon, such as "
                      "'FILE.h5:/group/counts'");
  std::error_code ec;
  if (!std::filesystem::exists(file, ec))
    throw input_error(what + ": the HDF5 file '" + printable_path(file) + "' does not exist");
  check_regular_file(file, limits::kMaxDataFileBytes, what + ": the HDF5 file");
#ifndef STREAKWRIGHT_HAVE_HDF5
  throw input_error(what +
                    ": this build of streakwright has no HDF5 support; convert the "
                    "dataset to a 16-bit PNG, a TIFF or a CSV file");
#else
  H5::Exception::dontPrint();
  try {
    if (!H5::H5File::isHdf5(file)) throw input_error(what + ": '" + file + "' is not an HDF5 file");
    H5::H5File h5(file, H5F_ACC_RDONLY);
    // Walk the path so a missing group gives a clear message rather than an HDF5 stack.
    std::size_t pos = 1;
    while (pos <= dataset.size()) {
      const auto next = dataset.find('/', pos);
      const std::string prefix = dataset.substr(0, next);
      if (!prefix.empty() && prefix.back() != '/' &&
          H5Lexists(h5.getId(), prefix.c_str(), H5P_DEFAULT) <= 0)
        throw input_error(what + ": '" + prefix + "' does not exist in '" + file + "'");
      if (next == std::string::npos) break;
      pos = next + 1;
    }
    if (h5.childObjType(dataset) != H5O_TYPE_DATASET)
      throw input_error(what + ": '" + dataset + "' is a group, not a dataset");
    H5::DataSet ds = h5.openDataSet(dataset);
    const H5T_class_t cls = ds.getTypeClass();
    if (cls != H5T_INTEGER && cls != H5T_FLOAT)
      throw input_error(what +
                        ": the dataset is not numeric; expected an integer or "
                        "floating-point 2-D dataset");
    H5::DataSpace space = ds.getSpace();
    const int rank = space.getSimpleExtentNdims();
    if (rank != 2)
      throw input_error(what + ": the dataset has " + std::to_string(rank) +
                        " dimensions; expected a 2-D dataset");
    hsize_t dims[2] = {0, 0};
    space.getSimpleExtentDims(dims);
    if (dims[0] == 0 || dims[1] == 0)
      throw input_error(what + ": the dataset is empty (" + std::to_string(dims[0]) + " x " +
                        std::to_string(dims[1]) + ")");
    if (dims[0] > limits::kMaxAxisCount || dims[1] > limits::kMaxAxisCount ||
        dims[0] * dims[1] > limits::kMaxSamples)
      throw input_error(what + ": the dataset declares " + std::to_string(dims[0]) + " x " +
                        std::to_string(dims[1]) + " values, above the limits of " +
                        std::to_string(limits::kMaxAxisCount) + " per side and " +
                        std::to_string(limits::kMaxSamples) +
                        " in all (docs/file_formats.md, Limits); it was not read");
    std::vector<double> buffer(static_cast<std::size_t>(dims[0] * dims[1]));
    ds.read(buffer.data(), H5::PredType::NATIVE_DOUBLE);
    Eigen::MatrixXd m(static_cast<Eigen::Index>(dims[0]), static_cast<Eigen::Index>(dims[1]));
    for (hsize_t i = 0; i < dims[0]; ++i)
      for (hsize_t j = 0; j < dims[1]; ++j)
        m(static_cast<Eigen::Index>(i), static_cast<Eigen::Index>(j)) = buffer[i * dims[1] + j];
    return m;
  } catch (const H5::Exception& e) {
    throw input_error(what + ": HDF5 could not read it (" + e.getFuncName() + ": " +
                      e.getDetailMsg() + ")");
  }
#endif
}

}  // namespace sw
