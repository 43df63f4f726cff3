#!/usr/bin/env python3
"""Starts `chorus run CONFIG --out OUT`, waits for RUN_DIR/coordinator.json to name a metrics
address, scrapes http://ADDRESS/metrics once while the run goes on (urllib), parses the page with
prometheus_client's parser (Debian python3-prometheus-client), waits for the run and then checks
that the address no longer answers. Prints "name value" lines: each sample as NAME_LABELVALUE,
then "run_exit", "closed_after" (1 when the port refused a connection after the run).

Usage: scrape_running_coordinator.py CHORUS CONFIG OUT"""
import glob
import json
import socket
import subprocess
import sys
import time
import urllib.request

from prometheus_client.parser import text_string_to_metric_families

chorus, config, out = sys.argv[1:4]
run = subprocess.Popen([chorus, "run", config, "--out", out], stdout=subprocess.DEVNULL,
                       stderr=subprocess.DEVNULL)
address = None
deadline = time.time() + 60
while address is None and time.time() < deadline and run.poll() is None:
    for path in glob.glob(out + "/*/coordinator.json"):
        try:
            address = json.load(open(path)).get("metrics_address")
        except ValueError:  # written atomically, but be safe
            pass
    time.sleep(0.02)
if address is None:
    run.kill()
    sys.exit("no metrics_address appeared in coordinator.json")
page = urllib.request.urlopen("http://" + address + "/metrics", timeout=10).read().decode()
for family in text_string_to_metric_families(page):
    for sample in family.samples:
        suffix = "".join("_" + v for _, v in sorted(sample.labels.items()))
        print(sample.name + suffix, sample.value)
print("run_exit", run.wait(timeout=300))
host, port = address.rsplit(":", 1)
try:
    socket.create_connection((host, int(port)), timeout=2).close()
    print("closed_after", 0)
except OSError:
    print("closed_after", 1)
