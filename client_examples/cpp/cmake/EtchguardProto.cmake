# Generates the C++ protobuf and gRPC code of etchguard.v1 from the repository's proto
# at build time, into the build tree, and wraps it in the static library
# `etchguard_proto`. Included by client_examples/cpp and bench/cpp so both compile the
# same generated code against the system gRPC and protobuf.
include_guard(GLOBAL)

find_package(Threads REQUIRED)
find_package(Protobuf REQUIRED)
find_package(gRPC CONFIG REQUIRED)

if(TARGET gRPC::grpc_cpp_plugin)
  set(ETCHGUARD_GRPC_PLUGIN $<TARGET_FILE:gRPC::grpc_cpp_plugin>)
else()
  find_program(ETCHGUARD_GRPC_PLUGIN grpc_cpp_plugin REQUIRED)
endif()
if(TARGET protobuf::protoc)
  set(ETCHGUARD_PROTOC $<TARGET_FILE:protobuf::protoc>)
else()
  find_program(ETCHGUARD_PROTOC protoc REQUIRED)
endif()

# The proto tree of the repository: <repo>/proto, two levels above this file's folder.
get_filename_component(ETCHGUARD_PROTO_ROOT "${CMAKE_CURRENT_LIST_DIR}/../../../proto" ABSOLUTE)
set(ETCHGUARD_PROTO_FILE "${ETCHGUARD_PROTO_ROOT}/etchguard/v1/etchguard.proto")
# the shard face (GetTopology; issue 14), used by the sharding client
set(ETCHGUARD_SHARDS_PROTO_FILE "${ETCHGUARD_PROTO_ROOT}/etchguard/v1/shards.proto")
set(ETCHGUARD_GEN_DIR "${CMAKE_BINARY_DIR}/generated")
set(ETCHGUARD_GEN_SOURCES
    "${ETCHGUARD_GEN_DIR}/etchguard/v1/etchguard.pb.cc"
    "${ETCHGUARD_GEN_DIR}/etchguard/v1/etchguard.grpc.pb.cc"
    "${ETCHGUARD_GEN_DIR}/etchguard/v1/shards.pb.cc"
    "${ETCHGUARD_GEN_DIR}/etchguard/v1/shards.grpc.pb.cc")
set(ETCHGUARD_GEN_HEADERS
    "${ETCHGUARD_GEN_DIR}/etchguard/v1/etchguard.pb.h"
    "${ETCHGUARD_GEN_DIR}/etchguard/v1/etchguard.grpc.pb.h"
    "${ETCHGUARD_GEN_DIR}/etchguard/v1/shards.pb.h"
    "${ETCHGUARD_GEN_DIR}/etchguard/v1/shards.grpc.pb.h")

add_custom_command(
  OUTPUT ${ETCHGUARD_GEN_SOURCES} ${ETCHGUARD_GEN_HEADERS}
  COMMAND ${CMAKE_COMMAND} -E make_directory "${ETCHGUARD_GEN_DIR}"
  COMMAND ${ETCHGUARD_PROTOC}
          --proto_path=${ETCHGUARD_PROTO_ROOT}
          --cpp_out=${ETCHGUARD_GEN_DIR}
          --grpc_out=${ETCHGUARD_GEN_DIR}
          --plugin=protoc-gen-grpc=${ETCHGUARD_GRPC_PLUGIN}
          ${ETCHGUARD_PROTO_FILE} ${ETCHGUARD_SHARDS_PROTO_FILE}
  DEPENDS ${ETCHGUARD_PROTO_FILE} ${ETCHGUARD_SHARDS_PROTO_FILE}
  COMMENT "Generating C++ code from etchguard/v1/etchguard.proto and shards.proto"
  VERBATIM)

add_library(etchguard_proto STATIC ${ETCHGUARD_GEN_SOURCES})
target_include_directories(etchguard_proto PUBLIC "${ETCHGUARD_GEN_DIR}")
target_link_libraries(etchguard_proto PUBLIC gRPC::grpc++ protobuf::libprotobuf Threads::Threads)
target_compile_features(etchguard_proto PUBLIC cxx_std_17)
