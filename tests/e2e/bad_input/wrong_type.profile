guarantee: EXACTLY_ONCE
min_backoff_ms: 1e3
