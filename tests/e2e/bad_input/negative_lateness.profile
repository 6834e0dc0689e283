guarantee: EXACTLY_ONCE
watermark_policy: BOUNDED_LATENESS
allowed_lateness_ms: -100
