#!/usr/bin/env python3
"""Parses a Prometheus text-format page with prometheus_client's own parser (Debian package
python3-prometheus-client) and prints one line per sample, "NAME{LABEL=VALUE,...} VALUE", labels
sorted, then "families N" and, per family, "type NAME TYPE". A page the parser rejects raises."""
import sys

from prometheus_client.parser import text_string_to_metric_families

with open(sys.argv[1], encoding="utf-8") as f:
    text = f.read()
families = list(text_string_to_metric_families(text))
for family in families:
    print("type", family.name, family.type)
    for sample in family.samples:
        labels = ",".join(f"{k}={v}" for k, v in sorted(sample.labels.items()))
        print(f"{sample.name}{{{labels}}} {sample.value!r}")
print("families", len(families))
