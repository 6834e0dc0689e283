// Package adapter is weir's connector-side library for Go: it turns a plain Go
// type implementing Source (open from a checkpoint, advance, checkpoint,
// committed) into a connector process that serves weir's Connector gRPC
// service, and gives connector code the helpers the trade expects: a
// watermark that never decreases, an idle rule, and capped exponential
// backoff with seeded jitter that honours the broker's retry-after hint.
//
// It mirrors the C++ adapter (adapters/cpp/include/weir/adapter/source.h,
// which states the protocol in full) and the Python one: given the same
// source logic, the three make the same broker calls at the same virtual
// times, so their traces have the same digest.
//
// Time: every source method gets a context.Context that carries the call's
// virtual clock. Now(ctx) is the virtual now in nanoseconds; it starts at the
// call's now and moves forward as broker answers arrive. Source code must
// never read a wall clock (time.Now, timers, tickers) and must draw any
// randomness from a generator seeded deterministically (MixSeed of the
// incarnation), so that a (scenario, seed) pair replays byte for byte.
//
// The broker: Broker(ctx) is weir's Broker service for the current call.
// Every call through it moves Now(ctx). A failed call returns a *BrokerError
// (errors are values: nothing panics); IsThrottled, IsTransient and
// IsOutOfRange classify it, and RetryGate turns it into the earliest virtual
// time of the next attempt.
//
// Steps: Advance gets a *Step that collects what the step produces (records,
// gaps, the watermark, when to be called again). Only Advance gets one, so a
// record cannot be emitted from Checkpoint or Committed by mistake.
//
// Errors a source returns fail that one call: an error made with
// google.golang.org/grpc/status keeps its code, any other error is UNKNOWN,
// and a panic is recovered into INTERNAL ("source panicked during
// Advance: ..."); the process keeps serving. weir reports each as
// connector-error (in Open from a committed checkpoint: bad-checkpoint).
//
// The log shape: a source that also implements LogSource reads a
// partitioned log (Broker(ctx).Read, Step.EmitLogRecord, Step.ReportGap,
// ResumePoints); one that implements ManyReaders takes part in runs with
// several readers (Assign, Revoke, Cut). See docs/log-mode.md.
//
// Threads: the adapter calls the source one call at a time, never
// concurrently. A context, its broker and a Step are valid only during the
// call they were given to; a broker call after the call returned fails with
// FAILED_PRECONDITION.
//
// A connector's main is one line:
//
//	func main() { adapter.Main(&Scans{}) }
//
// Main reads the start-up handshake from the environment (WEIR_BROKER_ADDRESS,
// WEIR_LISTEN_ADDRESS, WEIR_READY_FD; see proto/weir/v1/connector.proto) and
// serves until weir kills the process. See docs/go.md, "certify your Go
// connector in ten minutes".
package adapter
