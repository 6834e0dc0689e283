"""weir's connector-side library for Python: turns a plain Source (open from a
checkpoint, advance, checkpoint, committed) into a process that serves weir's
Connector service, and gives connector code the helpers the trade expects:
a watermark that never decreases, an idle rule, and capped exponential backoff
with seeded jitter that honours retry-after. A source reads a queue (the
default) or a partitioned log (Source.shape = SourceShape.LOG). See
docs/python.md.
"""

from .backoff import Backoff, BackoffPolicy, RetryGate, mix_seed
from .server import GrpcBrokerClient, serve, serve_forever
from .source import (INT64_MAX, INT64_MIN, Bookmark, BrokerClient, BrokerStatus, Context, OpenInfo,
                     PartitionOffset, ReadResult, ResumePoint, Source, SourceError, SourceShape,
                     Span, clamp_int64)
from .watermark import IdleRule, Watermark

__all__ = [
    "Backoff", "BackoffPolicy", "Bookmark", "BrokerClient", "BrokerStatus", "Context",
    "GrpcBrokerClient", "INT64_MAX", "INT64_MIN", "IdleRule", "OpenInfo", "PartitionOffset",
    "ReadResult", "ResumePoint", "RetryGate", "Source", "SourceError", "SourceShape", "Span",
    "Watermark", "clamp_int64", "mix_seed", "serve", "serve_forever",
]
