# Every dependency comes from Debian 12's packages. A missing one stops the
# configure step with the name of the package that provides it; deploy/setup
# installs them all.

# Stops the configure step when `found` is false, naming the package.
macro(lphi_stop_unless found what debian_package)
  if(NOT ${found})
    message(FATAL_ERROR
      "lphi needs ${what}: install the Debian package '${debian_package}' "
      "(deploy/setup does this when run as root).")
  endif()
endmacro()

macro(lphi_require_config name debian_package)
  find_package(${name} ${ARGN} CONFIG QUIET)
  lphi_stop_unless(${name}_FOUND ${name} ${debian_package})
endmacro()

macro(lphi_require_module name debian_package)
  find_package(${name} ${ARGN} QUIET)
  lphi_stop_unless(${name}_FOUND ${name} ${debian_package})
endmacro()

find_package(PkgConfig QUIET)
if(NOT PKG_CONFIG_FOUND)
  message(FATAL_ERROR "lphi needs pkg-config: install the Debian package 'pkg-config'.")
endif()

macro(lphi_require_pkgconfig prefix module debian_package)
  pkg_check_modules(${prefix} QUIET IMPORTED_TARGET ${module})
  lphi_stop_unless(${prefix}_FOUND ${module} ${debian_package})
endmacro()

lphi_require_module(Boost libboost-dev 1.74)
lphi_require_config(Eigen3 libeigen3-dev)
lphi_require_config(Ceres libceres-dev)
lphi_require_pkgconfig(ZMQ libzmq libzmq3-dev)
lphi_require_config(cppzmq cppzmq-dev)
lphi_require_module(SQLite3 libsqlite3-dev)
lphi_require_config(spdlog libspdlog-dev)
lphi_require_config(fmt libfmt-dev)
lphi_require_config(nlohmann_json nlohmann-json3-dev)
lphi_require_config(CLI11 libcli11-dev)
lphi_require_config(tomlplusplus libtomlplusplus-dev)
lphi_require_pkgconfig(SYSTEMD libsystemd libsystemd-dev)
lphi_require_module(Threads build-essential)

if(LPHI_BUILD_TESTS)
  lphi_require_config(GTest libgtest-dev)
  lphi_require_module(GSL libgsl-dev)
endif()
if(LPHI_BUILD_BENCHMARKS)
  lphi_require_config(benchmark libbenchmark-dev)
endif()
