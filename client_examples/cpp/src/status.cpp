// Reading the field a refusal names from a rich gRPC status.
//
// The server puts a serialized google.rpc.Status in the grpc-status-details-bin
// trailer; its details are google.protobuf.Any messages holding a google.rpc.BadRequest
// (INVALID_ARGUMENT) and a google.rpc.ErrorInfo (every refusal). The system packages
// ship no C++ code for google.rpc, so this walks the published wire layout of those
// three messages with protobuf's own reader instead of generating it:
//   Status      { int32 code = 1; string message = 2; repeated Any details = 3; }
//   Any         { string type_url = 1; bytes value = 2; }
//   BadRequest  { repeated FieldViolation field_violations = 1; }
//   FieldViolation { string field = 1; string description = 2; }
//   ErrorInfo   { string reason = 1; string domain = 2; map<string, string> metadata = 3; }
#include <functional>
#include <string>

#include <google/protobuf/io/coded_stream.h>
#include <google/protobuf/wire_format_lite.h>

#include "etchguard/client.hpp"

namespace etchguard::client {
namespace {

using google::protobuf::io::CodedInputStream;
using google::protobuf::internal::WireFormatLite;

// Calls `on_bytes(field_number, bytes)` for every length-delimited field of a message;
// skips the rest. False when the bytes are not a well-formed message.
bool ForEachBytesField(const std::string& message,
                       const std::function<void(int, const std::string&)>& on_bytes) {
  CodedInputStream in(reinterpret_cast<const std::uint8_t*>(message.data()),
                      static_cast<int>(message.size()));
  while (true) {
    const std::uint32_t tag = in.ReadTag();
    if (tag == 0) return true;
    if (WireFormatLite::GetTagWireType(tag) == WireFormatLite::WIRETYPE_LENGTH_DELIMITED) {
      std::uint32_t length = 0;
      std::string bytes;
      if (!in.ReadVarint32(&length) || !in.ReadString(&bytes, static_cast<int>(length))) return false;
      on_bytes(WireFormatLite::GetTagFieldNumber(tag), bytes);
    } else if (!WireFormatLite::SkipField(&in, tag)) {
      return false;
    }
  }
}

// The string field `number` of a message (the last one when repeated).
std::string StringField(const std::string& message, int number) {
  std::string out;
  ForEachBytesField(message, [&](int n, const std::string& b) { if (n == number) out = b; });
  return out;
}

bool EndsWith(const std::string& s, const std::string& suffix) {
  return s.size() >= suffix.size() && s.compare(s.size() - suffix.size(), suffix.size(), suffix) == 0;
}

}  // namespace

std::string FieldOfStatusDetails(const std::string& serialized_status) {
  std::string from_bad_request, from_error_info;
  ForEachBytesField(serialized_status, [&](int number, const std::string& any) {
    if (number != 3) return;  // Status.details
    const std::string type_url = StringField(any, 1);
    const std::string value = StringField(any, 2);
    if (EndsWith(type_url, "/google.rpc.BadRequest") && from_bad_request.empty()) {
      ForEachBytesField(value, [&](int n, const std::string& violation) {
        if (n == 1 && from_bad_request.empty()) from_bad_request = StringField(violation, 1);
      });
    } else if (EndsWith(type_url, "/google.rpc.ErrorInfo")) {
      ForEachBytesField(value, [&](int n, const std::string& entry) {
        if (n == 3 && StringField(entry, 1) == "field") from_error_info = StringField(entry, 2);
      });
    }
  });
  return from_bad_request.empty() ? from_error_info : from_bad_request;
}

ServiceError::ServiceError(grpc::StatusCode code, const std::string& message, std::string field)
    : std::runtime_error(message), code_(code), field_(std::move(field)) {}

}  // namespace etchguard::client
