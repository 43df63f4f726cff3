"""What deploy/ asks of chorus, for tests/deploy/deploy_files_test.cc.

Usage: deploy_files.py DEPLOY_DIR

Reads every file under DEPLOY_DIR and prints one JSON object per line:
  {"kind": "command", "file": F, "argv": [...]}  each chorus or chorus-worker command line in a
      shell script, a systemd unit's Exec* line, or a Kubernetes container (directly, or inside
      an `sh -c` script)
  {"kind": "config", "file": F, "text": YAML}  each chorus config: a YAML file with a `run`
      section, or a ConfigMap entry holding one
  {"kind": "problem", "file": F, "what": ...}  a YAML file that does not parse, a manifest
      missing apiVersion/kind/metadata.name, or Kubernetes objects that do not fit together
      (a reference to a Secret, ConfigMap or claim that is not there; a Service that selects no
      pod; workers pointed at an address no Service offers; a token path outside the mounted
      Secret; a listen port that is not the Service's; a file kustomization.yaml leaves out)
Needs PyYAML (Debian python3-yaml).
"""

import json
import os
import posixpath
import shlex
import sys

import yaml

CHORUS_PROGRAMS = ("chorus", "chorus-worker")
SHELL_OPERATORS = {"&&", "||", ";", "|", "&", "(", ")", ";;", "|&"}


def emit(**record):
    print(json.dumps(record))


def shell_commands(text):
    """The argv of every chorus/chorus-worker call in shell text (one command per logical line)."""
    logical = text.replace("\\\n", " ")
    for line in logical.splitlines():
        lexer = shlex.shlex(line, posix=True, punctuation_chars=True)
        lexer.whitespace_split = True
        lexer.commenters = "#"
        try:
            tokens = list(lexer)
        except ValueError:  # a quote that spans lines (heredoc, multi-line string): no command
            continue
        argv = None
        for token in tokens + [";"]:
            if token in SHELL_OPERATORS:
                if argv:
                    yield argv
                argv = None
            elif argv is not None:
                argv.append(token)
            elif posixpath.basename(token) in CHORUS_PROGRAMS:
                argv = [posixpath.basename(token)]


def unit_commands(text):
    """Shell-like command lines of a systemd unit's Exec*= settings."""
    logical = text.replace("\\\n", " ")
    for line in logical.splitlines():
        key, sep, value = line.partition("=")
        if sep and key.strip().startswith("Exec"):
            yield from shell_commands(value.strip().lstrip("-@:+!"))


def containers(doc):
    """Every container (and init container) of a Pod template anywhere inside `doc`."""
    if isinstance(doc, dict):
        for key in ("containers", "initContainers"):
            if isinstance(doc.get(key), list):
                yield from doc[key]
        for value in doc.values():
            yield from containers(value)
    elif isinstance(doc, list):
        for value in doc:
            yield from containers(value)


def pod_templates(doc):
    """(labels, pod spec) of every Pod template inside `doc`."""
    if isinstance(doc, dict):
        if isinstance(doc.get("template"), dict) and "spec" in doc["template"]:
            template = doc["template"]
            yield template.get("metadata", {}).get("labels", {}), template["spec"]
        for value in doc.values():
            yield from pod_templates(value)
    elif isinstance(doc, list):
        for value in doc:
            yield from pod_templates(value)


def pod_mounts(spec):
    """Mount path -> volume, over every container of a pod spec."""
    volumes = {v["name"]: v for v in spec.get("volumes", [])}
    return {m["mountPath"]: volumes.get(m["name"], {})
            for c in spec.get("containers", []) for m in c.get("volumeMounts", [])}


def chorus_config(text):
    """The parsed config if `text` is a chorus config (it has a `run` section), else None."""
    doc = yaml.safe_load(text)
    return doc if isinstance(doc, dict) and "run" in doc else None


def container_commands(container):
    """The chorus argv a container runs: its command + args, or those inside its `sh -c`."""
    argv = [str(a) for a in container.get("command", []) + container.get("args", [])]
    if not argv:
        return
    if posixpath.basename(argv[0]) in CHORUS_PROGRAMS:
        yield [posixpath.basename(argv[0])] + argv[1:]
    elif posixpath.basename(argv[0]) in ("sh", "bash") and "-c" in argv:
        yield from shell_commands(argv[argv.index("-c") + 1])


class Manifests:
    """The Kubernetes objects of deploy/, checked for references that do not resolve."""

    def __init__(self):
        self.objects = []  # (file, doc)

    def add(self, path, doc):
        if "apiVersion" not in doc or "kind" not in doc or "name" not in doc.get("metadata", {}):
            emit(kind="problem", file=path,
                 what="a manifest needs apiVersion, kind and metadata.name")
            return
        self.objects.append((path, doc))

    def names(self, kind):
        return {doc["metadata"]["name"]: doc for _, doc in self.objects if doc["kind"] == kind}

    def check(self):
        secrets, config_maps = self.names("Secret"), self.names("ConfigMap")
        claims = self.names("PersistentVolumeClaim")
        for path, doc in self.objects:
            for _, spec in pod_templates(doc):
                self.check_pod(path, spec, secrets, config_maps, claims)
        self.check_services()

    def check_pod(self, path, spec, secrets, config_maps, claims):
        mounts = pod_mounts(spec)
        for volume in spec.get("volumes", []):
            for key, known, field in (("secret", secrets, "secretName"),
                                      ("configMap", config_maps, "name"),
                                      ("persistentVolumeClaim", claims, "claimName")):
                if key in volume and volume[key][field] not in known:
                    emit(kind="problem", file=path, what=f"no {key} named {volume[key][field]}")
        for container in spec.get("containers", []):
            for argv in container_commands(container):
                if "--token-file" in argv:
                    token_file = argv[argv.index("--token-file") + 1]
                    self.check_secret_file(path, token_file, mounts, secrets)
                if "--coordinator" in argv:
                    self.check_coordinator(path, argv[argv.index("--coordinator") + 1])
        for config in self.pod_configs(mounts, config_maps):
            token_file = config.get("cluster", {}).get("token_file")
            if token_file:
                self.check_secret_file(path, token_file, mounts, secrets)

    @staticmethod
    def pod_configs(mounts, config_maps):
        """The chorus configs in the ConfigMaps mounted by a pod."""
        for volume in mounts.values():
            config_map = config_maps.get(volume.get("configMap", {}).get("name"), {})
            for text in config_map.get("data", {}).values():
                config = chorus_config(text)
                if config is not None:
                    yield config

    @staticmethod
    def check_secret_file(path, file, mounts, secrets):
        directory, key = posixpath.split(file)
        secret = mounts.get(directory, {}).get("secret", {}).get("secretName")
        keys = {**secrets.get(secret, {}).get("data", {}),
                **secrets.get(secret, {}).get("stringData", {})}
        if key not in keys:
            emit(kind="problem", file=path, what=f"{file} is not a key of a Secret mounted there")

    def check_coordinator(self, path, address):
        host, _, port = address.rpartition(":")
        service = self.names("Service").get(host)
        if service is None or int(port) not in [p["port"] for p in service["spec"]["ports"]]:
            emit(kind="problem", file=path, what=f"no Service offers {address}")

    def check_services(self):
        config_maps = self.names("ConfigMap")
        for path, service in self.objects:
            if service["kind"] != "Service":
                continue
            selector = service["spec"].get("selector", {})
            pods = [spec for _, doc in self.objects for labels, spec in pod_templates(doc)
                    if selector.items() <= labels.items()]
            if not pods:
                emit(kind="problem", file=path, what="the Service selects no pod template")
            for port in service["spec"]["ports"]:
                self.check_target_port(path, port, pods, config_maps)

    @staticmethod
    def check_target_port(path, port, pods, config_maps):
        target = port.get("targetPort", port["port"])
        for spec in pods:
            ports = {p.get("name"): p["containerPort"]
                     for c in spec["containers"] for p in c.get("ports", [])}
            number = ports.get(target, target)
            if number not in ports.values():
                emit(kind="problem", file=path,
                     what=f"no container port {target} behind the Service")
            for config in Manifests.pod_configs(pod_mounts(spec), config_maps):
                listen = str(config.get("cluster", {}).get("listen", ""))
                if listen.rpartition(":")[2] != str(number):
                    emit(kind="problem", file=path, what=f"the coordinator listens on {listen}, "
                                                         f"the Service sends to port {number}")


def read_yaml(path, rel, manifests):
    try:
        with open(path) as f:
            docs = [d for d in yaml.safe_load_all(f) if d is not None]
    except yaml.YAMLError as e:
        emit(kind="problem", file=rel, what=f"does not parse: {e}")
        return
    for doc in docs:
        if not isinstance(doc, dict):
            emit(kind="problem", file=rel, what="not a YAML mapping")
        elif "run" in doc:
            with open(path) as f:
                emit(kind="config", file=rel, text=f.read())
        elif doc.get("kind") == "Kustomization":
            check_kustomization(path, rel, doc)
        else:
            manifests.add(rel, doc)
            for key, text in doc.get("data", {}).items() if doc.get("kind") == "ConfigMap" else []:
                if chorus_config(text) is not None:
                    emit(kind="config", file=f"{rel}:{key}", text=text)
            for container in containers(doc):
                for argv in container_commands(container):
                    emit(kind="command", file=rel, argv=argv)


def check_kustomization(path, rel, doc):
    directory = os.path.dirname(path)
    listed = set(doc.get("resources", []))
    present = {f for f in os.listdir(directory)
               if f.endswith((".yaml", ".yml")) and f != os.path.basename(path)}
    for name in sorted(listed ^ present):
        what = "is listed but missing" if name in listed else "is not listed in resources"
        emit(kind="problem", file=rel, what=f"{name} {what}")


def main():
    root = sys.argv[1]
    manifests = Manifests()
    for directory, _, files in sorted(os.walk(root)):
        for name in sorted(files):
            path = os.path.join(directory, name)
            rel = os.path.relpath(path, root)
            if name.endswith((".yaml", ".yml")):
                read_yaml(path, rel, manifests)
                continue
            with open(path) as f:
                text = f.read()
            if name.endswith((".service", ".timer")):
                commands = unit_commands(text)
            elif text.startswith("#!") and "sh" in text.splitlines()[0]:
                commands = shell_commands(text)
            else:
                continue
            for argv in commands:
                emit(kind="command", file=rel, argv=argv)
    manifests.check()


if __name__ == "__main__":
    main()
