#include "harness/broker/broker_session.h"

namespace weir {

void BrokerSession::BeginCall(VirtualTime now) {
  in_call_ = true;
  now_ = now;
  calls_in_window_ = 0;
}

VirtualTime BrokerSession::EndCall() {
  in_call_ = false;
  return now_;
}

bool BrokerSession::Enter(const char* method, CallStatus* status) {
  status->now = now_;
  if (!in_call_) {
    status->code = CallCode::kFailedPrecondition;
    status->message = "broker call outside a connector call";
    auto& e = trace_.Append(now_);
    auto* x = e.mutable_protocol_error();
    x->set_call(method);
    x->set_detail(status->message);
    trace_.Commit();
    return false;
  }
  ++calls_in_window_;
  return true;
}

void BrokerSession::OnStrayCall(const std::string& method) {
  auto& e = trace_.Append(now_);
  auto* x = e.mutable_protocol_error();
  x->set_call(method);
  x->set_detail("broker call outside a connector call");
  trace_.Commit();
}

CallStatus BrokerSession::Pull(const v1::PullRequest& request, v1::PullResponse* response) {
  CallStatus status;
  if (!Enter("Pull", &status)) return status;
  model_.Pull(request, now_, response);
  return status;
}

CallStatus BrokerSession::Ack(const v1::AckRequest& request, v1::AckResponse* response) {
  CallStatus status;
  if (!Enter("Ack", &status)) return status;
  model_.Ack(request, now_);
  response->set_now_ns(now_);
  return status;
}

CallStatus BrokerSession::Nack(const v1::NackRequest& request, v1::NackResponse* response) {
  CallStatus status;
  if (!Enter("Nack", &status)) return status;
  model_.Nack(request, now_);
  response->set_now_ns(now_);
  return status;
}

CallStatus BrokerSession::ExtendLease(const v1::ExtendLeaseRequest& request,
                                      v1::ExtendLeaseResponse* response) {
  CallStatus status;
  if (!Enter("ExtendLease", &status)) return status;
  model_.ExtendLease(request, now_, response);
  return status;
}

}  // namespace weir
