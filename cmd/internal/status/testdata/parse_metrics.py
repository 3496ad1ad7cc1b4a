"""Parse Prometheus text exposition on stdin with the reference parser of
the prometheus_client Python library (Debian python3-prometheus-client) and
print every sample as JSON: {"name{label=value,...}": value, ...}, labels
sorted by name. A parse error exits non-zero."""
import json
import sys

from prometheus_client.parser import text_string_to_metric_families

out = {}
types = {}
for fam in text_string_to_metric_families(sys.stdin.read()):
    types[fam.name] = fam.type
    for s in fam.samples:
        labels = ",".join("%s=%s" % (k, s.labels[k]) for k in sorted(s.labels))
        key = s.name + ("{" + labels + "}" if labels else "")
        if key in out:
            sys.exit("duplicate sample " + key)
        out[key] = repr(float(s.value))
json.dump({"samples": out, "types": types}, sys.stdout)
