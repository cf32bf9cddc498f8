#pragma once
// Reading a 2-D numeric dataset from an HDF5 file (The HDF Group, HDF5 file format
// specification version 3.0) with the HDF5 C++ API. Available when the build found HDF5
// (STREAKWRIGHT_HAVE_HDF5); otherwise every call throws a clear sw::Error(kInput).

#include <string>

#include <Eigen/Core>

namespace sw {

/// Splits an image reference "FILE.h5:/group/dataset" (extensions .h5, .hdf5, .he5, .nxs,
/// case-insensitive) into file and dataset path. Returns false when `ref` is not of that form.
bool split_hdf5_reference(const std::string& ref, std::string* file, std::string* dataset);

/// Reads the 2-D dataset `dataset` of `file` as doubles (rows = first dimension). Any integer
/// or floating-point element type is converted. Throws sw::Error(kInput) naming `where`
/// (the sidecar), the file and the dataset when the file is missing or not HDF5, the dataset is
/// absent, not numeric or not 2-D.
Eigen::MatrixXd read_hdf5_matrix(const std::string& file, const std::string& dataset,
                                 const std::string& where);

}  // namespace sw
