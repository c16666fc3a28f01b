#!/usr/bin/env python3
"""The layers of sightfix, checked: which library may use which (docs/architecture.md).

Three checks, each failing with the offending file or target named:
1. Includes: a source in a library's folder includes project headers only from that library's
   allowed layers (the closure of ALLOWED below), and none of the third-party headers its layer
   forbids (FORBIDDEN_INCLUDES; the thin client's public headers carry no OpenCV, Boost or FAISS).
2. The CMake link graph (`cmake --graphviz` of the build folder): a library's direct link
   dependencies among our libraries lie within its allowed layers.
3. The real link line of a program that links only sightfix_client (layers_probe_client): with
   static libraries PRIVATE dependencies still reach a consumer's link line, so the line itself is
   read: no FAISS, no Ceres, no OpenCV features2d/calib3d, no SQLite.

Usage: check_layers.py SOURCE_DIR BUILD_DIR
"""
import os
import re
import subprocess
import sys
import tempfile

# folder -> (CMake target, layers it may use directly; their own allowed layers come along).
LIBRARIES = {
    "indexer/base": ("sightfix_base", []),
    "proto": ("sightfix_proto", ["indexer/base"]),
    "indexer/map": ("sightfix_map", ["indexer/base"]),
    "indexer/vision": ("sightfix_vision", ["indexer/map"]),
    "indexer/builder": ("sightfix_builder", ["indexer/vision"]),
    "server/engine": ("sightfix_engine", ["indexer/vision"]),
    "server/wire": ("sightfix_wire", ["server/engine", "proto"]),
    "server/service": ("sightfix_service", ["server/wire"]),
    "client/api": ("sightfix_client", ["proto"]),
    "client/monitor": ("sightfix_monitor", ["indexer/base"]),
    "client/eval": ("sightfix_eval", ["client/api", "client/monitor", "server/wire"]),
    "demo_route": ("sightfix_demo", ["indexer/builder"]),
}
# Programs: folder -> layers their sources may use (they sit above every library they link).
PROGRAMS = {
    "client/cli": ["client/eval"],
    "server": ["server/service"],  # sightfix_server_main.cc only (sub-folders are libraries)
    "indexer": ["indexer/builder"],  # sightfix_indexer_main.cc only
}
# Third-party headers a layer must not include (prefix match on the include path).
THIN = ["faiss/", "ceres/", "opencv2/features2d", "opencv2/calib3d", "sqlite3", "boost/beast",
        "exiv2", "proj.h"]
FORBIDDEN_INCLUDES = {
    "indexer/base": THIN + ["yaml-cpp", "nlohmann/"],
    "proto": THIN + ["opencv2/", "yaml-cpp"],
    "client/api": THIN + ["yaml-cpp"],
    "client/monitor": THIN,
    "indexer/map": ["ceres/", "opencv2/features2d", "exiv2", "proj.h", "boost/"],
    "server/engine": ["ceres/", "exiv2", "proj.h", "boost/", "sqlite3"],
}
# Public headers of the thin client: nothing of OpenCV, Boost or FAISS.
CLIENT_PUBLIC_FORBIDDEN = ["opencv2/", "boost/", "faiss/"]
# Link line of a program that links only the thin client.
LINK_FORBIDDEN = ["faiss", "ceres", "opencv_features2d", "opencv_calib3d", "sqlite3", "exiv2",
                  "libproj", "sightfix_map", "sightfix_engine", "sightfix_vision"]

INCLUDE = re.compile(r'^\s*#\s*include\s*[<"]([^>"]+)[>"]', re.M)


def client_public_headers(src):
    """The client library's installed headers: PUBLIC_HEADERS in client/api/CMakeLists.txt
    (the others, e.g. connection.h, stay inside the library)."""
    text = open(os.path.join(src, "client/api/CMakeLists.txt"), encoding="utf-8").read()
    m = re.search(r"PUBLIC_HEADERS([^)]*)\)", text)
    return set(m.group(1).split()) if m else set()


def closure(folder):
    seen, todo = set(), list(deps_of(folder))
    while todo:
        f = todo.pop()
        if f not in seen:
            seen.add(f)
            todo.extend(deps_of(f))
    return seen


def deps_of(folder):
    if folder in LIBRARIES:
        return LIBRARIES[folder][1]
    return PROGRAMS[folder]


def owner(path):
    """The layer a source path belongs to: the longest folder key that contains it."""
    best = None
    for folder in list(LIBRARIES) + list(PROGRAMS):
        if path.startswith(folder + "/"):
            rest = path[len(folder) + 1:]
            if folder in PROGRAMS and "/" in rest:
                continue  # a program folder owns only its own files, not sub-libraries
            if best is None or len(folder) > len(best):
                best = folder
    return best


def check_includes(src):
    errors = []
    for top in ("indexer", "server", "client", "proto", "demo_route"):
        for dirpath, _, files in os.walk(os.path.join(src, top)):
            for name in files:
                if not name.endswith((".h", ".cc")):
                    continue
                rel = os.path.relpath(os.path.join(dirpath, name), src)
                layer = owner(rel)
                if layer is None:
                    errors.append(f"{rel}: in no layer of check_layers.py")
                    continue
                allowed = closure(layer) | {layer}
                text = open(os.path.join(src, rel), encoding="utf-8").read()
                for inc in INCLUDE.findall(text):
                    target = owner(inc) if inc.count("/") >= 1 else None
                    if target is not None and target not in allowed:
                        errors.append(f"{rel}: includes {inc} ({target} is not below {layer})")
                    for bad in FORBIDDEN_INCLUDES.get(layer, []):
                        if inc.startswith(bad):
                            errors.append(f"{rel}: includes <{inc}>, forbidden in {layer}")
                    if layer == "client/api" and name in client_public_headers(src):
                        for bad in CLIENT_PUBLIC_FORBIDDEN:
                            if inc.startswith(bad):
                                errors.append(f"{rel}: public client header includes <{inc}>")
    return errors


def check_link_graph(build):
    errors = []
    with tempfile.TemporaryDirectory() as tmp:
        dot = os.path.join(tmp, "deps.dot")
        subprocess.run(["cmake", f"--graphviz={dot}", "."], cwd=build, check=True,
                       stdout=subprocess.DEVNULL)
        text = open(dot, encoding="utf-8").read()
    labels = dict(re.findall(r'"(node\d+)" \[ label = "([^"]+)"', text))
    target_layer = {t: f for f, (t, _) in LIBRARIES.items()}
    for a, b in re.findall(r'"(node\d+)" -> "(node\d+)"', text):
        la, lb = labels.get(a), labels.get(b)
        if la in target_layer and lb in target_layer:
            fa, fb = target_layer[la], target_layer[lb]
            if fb not in closure(fa):
                errors.append(f"CMake: {la} links {lb} ({fb} is not below {fa})")
    return errors


def check_link_line(build):
    path = os.path.join(build, "tests", "CMakeFiles", "layers_probe_client.dir", "link.txt")
    if not os.path.exists(path):
        return [f"{path} missing (build the tests first)"]
    line = open(path, encoding="utf-8").read()
    errors = [f"layers_probe_client links {bad}" for bad in LINK_FORBIDDEN if bad in line]
    if errors:
        print("link line:", line.strip())
    return errors


def main():
    src, build = sys.argv[1], sys.argv[2]
    errors = check_includes(src) + check_link_graph(build) + check_link_line(build)
    for e in errors:
        print("FAIL", e)
    print(f"layers: {len(LIBRARIES)} libraries, {len(PROGRAMS)} program folders, "
          f"{len(errors)} violations")
    return 1 if errors else 0


if __name__ == "__main__":
    sys.exit(main())
