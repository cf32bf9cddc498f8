# Finds the three OpenCV modules streakwright uses (core, imgproc, imgcodecs) without requiring
# the full OpenCV development meta-package (which alone ships OpenCVConfig.cmake on Debian).
# Defines the imported target OpenCVMinimal::OpenCVMinimal.
find_package(OpenCV QUIET COMPONENTS core imgproc imgcodecs)
if(OpenCV_FOUND)
  add_library(OpenCVMinimal::OpenCVMinimal INTERFACE IMPORTED)
  target_link_libraries(OpenCVMinimal::OpenCVMinimal INTERFACE ${OpenCV_LIBS})
  target_include_directories(OpenCVMinimal::OpenCVMinimal INTERFACE ${OpenCV_INCLUDE_DIRS})
  set(OpenCVMinimal_FOUND TRUE)
  return()
endif()
find_path(OpenCVMinimal_INCLUDE_DIR opencv2/core.hpp PATH_SUFFIXES opencv4)
foreach(m core imgproc imgcodecs)
  find_library(OpenCVMinimal_${m}_LIBRARY NAMES opencv_${m})
  list(APPEND OpenCVMinimal_LIBRARIES ${OpenCVMinimal_${m}_LIBRARY})
endforeach()
include(FindPackageHandleStandardArgs)
find_package_handle_standard_args(OpenCVMinimal REQUIRED_VARS OpenCVMinimal_INCLUDE_DIR
  OpenCVMinimal_core_LIBRARY OpenCVMinimal_imgproc_LIBRARY OpenCVMinimal_imgcodecs_LIBRARY)
if(OpenCVMinimal_FOUND AND NOT TARGET OpenCVMinimal::OpenCVMinimal)
  add_library(OpenCVMinimal::OpenCVMinimal INTERFACE IMPORTED)
  target_link_libraries(OpenCVMinimal::OpenCVMinimal INTERFACE ${OpenCVMinimal_LIBRARIES})
  target_include_directories(OpenCVMinimal::OpenCVMinimal INTERFACE ${OpenCVMinimal_INCLUDE_DIR})
endif()
