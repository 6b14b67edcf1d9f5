#pragma once
// Program version, set by CMake from project(VERSION ...).
namespace radmode {
inline constexpr const char* version = RADMODE_VERSION;
}
