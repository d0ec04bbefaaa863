# The reference side of `shoal-bench refs` (refs.go embeds this file and
# runs it with a python3 that imports igraph and leidenalg).
#
#   python3 refs.py EDGES NODES OUTDIR --resolution R --seeds 0,1,2 \
#       --igraph-iterations -1 --leidenalg-iterations 2 \
#       --run cpm:leidenalg --run modularity:igraph ...
#
# EDGES is a "u<TAB>v" file of 0-based integer ids (gen.WriteEdgeList),
# NODES the number of nodes (ids 0..NODES-1). For every --run and every seed
# it times the algorithm call alone (time.perf_counter around it; loading
# the file and building the igraph graph are not timed), writes the
# membership to OUTDIR/<objective>-<method>-<seed>.txt, one label per line
# in node order, and prints one JSON object per line. The first line holds
# the versions and the peak resident size after the imports, the last line
# the peak resident size of the whole process (VmHWM).
#
# Methods:
#   leidenalg  leidenalg.find_partition with CPMVertexPartition (at the
#              resolution) or ModularityVertexPartition; seed=seed. The call
#              includes leidenalg's copy of the igraph graph into its own.
#   igraph     igraph.Graph.community_leiden with objective_function "CPM"
#              (resolution_parameter = the resolution) or "modularity"
#              (resolution 1); igraph draws from Python's random module,
#              seeded with random.seed(seed) before the call.
# Each runs its --*-iterations iterations of Leiden (-1: until an iteration
# no longer improves the quality; 2 is the default of both libraries).

import argparse
import inspect
import json
import os
import random
import resource
import sys
import time

import igraph
import leidenalg


def peak_rss_kib():
    # VmHWM: the peak resident size of this process image. getrusage's
    # ru_maxrss is no good here: on Linux it keeps the parent's peak across
    # fork and exec.
    try:
        with open("/proc/self/status") as f:
            for line in f:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1])
    except OSError:
        pass
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("edges")
    ap.add_argument("nodes", type=int)
    ap.add_argument("outdir")
    ap.add_argument("--resolution", type=float, required=True)
    ap.add_argument("--seeds", default="0")
    ap.add_argument("--igraph-iterations", type=int, default=-1)
    ap.add_argument("--leidenalg-iterations", type=int, default=2)
    ap.add_argument("--run", action="append", default=[])
    a = ap.parse_args()

    baseline = peak_rss_kib()  # after the imports
    g = igraph.Graph.Read_Edgelist(a.edges, directed=False)
    if g.vcount() < a.nodes:
        g.add_vertices(a.nodes - g.vcount())
    print(json.dumps({"kind": "versions", "python": sys.version.split()[0],
                      "igraph": igraph.__version__, "leidenalg": leidenalg.version,
                      "nodes": g.vcount(), "edges": g.ecount(), "baseline_rss_kib": baseline}), flush=True)

    # python-igraph 0.10.2 (Debian 12) names the parameter
    # resolution_parameter; later releases call it resolution.
    params = inspect.signature(igraph.Graph.community_leiden).parameters
    res_name = "resolution" if "resolution" in params else "resolution_parameter"

    for spec in a.run:
        objective, method = spec.split(":")
        for seed in [int(s) for s in a.seeds.split(",")]:
            native = None
            if method == "leidenalg":
                if objective == "cpm":
                    kind, kw = leidenalg.CPMVertexPartition, {"resolution_parameter": a.resolution}
                else:
                    kind, kw = leidenalg.ModularityVertexPartition, {}
                t0 = time.perf_counter()
                p = leidenalg.find_partition(g, kind, n_iterations=a.leidenalg_iterations, seed=seed, **kw)
                sec = time.perf_counter() - t0
                membership = p.membership
                native = p.quality()
            elif method == "igraph":
                obj = "CPM" if objective == "cpm" else "modularity"
                res = a.resolution if objective == "cpm" else 1.0
                random.seed(seed)
                t0 = time.perf_counter()
                c = g.community_leiden(objective_function=obj, n_iterations=a.igraph_iterations, **{res_name: res})
                sec = time.perf_counter() - t0
                membership = c.membership
            else:
                raise SystemExit("refs.py: unknown method " + method)
            path = os.path.join(a.outdir, "%s-%s-%d.txt" % (objective, method, seed))
            with open(path, "w") as f:
                f.write("\n".join(map(str, membership)))
                f.write("\n")
            print(json.dumps({"kind": "run", "objective": objective, "method": method, "seed": seed,
                              "seconds": sec, "membership": path, "native_quality": native}), flush=True)
    print(json.dumps({"kind": "peak", "max_rss_kib": peak_rss_kib()}), flush=True)


if __name__ == "__main__":
    main()
