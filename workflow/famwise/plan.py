"""What a study run consists of: subjects, stages, their settings and files.

The Snakemake rules and ``famwise check`` both read this plan. Each stage's
settings hold only the spec sections that stage depends on, as plain JSON
text, so that Snakemake's params trigger reruns exactly what changed.
"""

import json
from dataclasses import dataclass
from functools import cached_property
from pathlib import Path

import numpy as np

from famwise import bids
from famwise.errors import UserError
from famwise.io import discover_pattern, subject_file
from famwise.spec import LoadedStudy, load_study
from famwise.spec.models import IDENTIFIER


def _json(value) -> str:
    return json.dumps(value, sort_keys=True, separators=(",", ":"))


@dataclass(frozen=True)
class Plan:
    """The resolved run of one study spec."""

    loaded: LoadedStudy

    @classmethod
    def from_spec(cls, path: str | Path) -> "Plan":
        """Load and validate a spec, then resolve its subjects (UserError on problems)."""
        plan = cls(load_study(path))
        plan.check_inputs()
        return plan

    @property
    def study(self):
        return self.loaded.study

    # ---- subjects -------------------------------------------------------------

    @cached_property
    def found_subjects(self) -> tuple[str, ...]:
        """Every subject named by ``subjects.ids`` or found by discovery."""
        spec = self.study.subjects
        if spec.ids is not None:
            return tuple(spec.ids)
        if spec.source == "bids":
            found = bids.discover_subjects(self.loaded.resolve(spec.path))
        else:
            found = discover_pattern(self.loaded.folder, spec.path)
        if not found:
            raise UserError(f"{self.loaded.path.name} subjects.path: no subject data found for '{spec.path}' in {self.loaded.folder}")
        for subject in found:
            if not IDENTIFIER.match(subject):
                raise UserError(f"subject '{subject}' found in {spec.path} is not a plain identifier (letters and digits only); rename its files")
        return tuple(found)

    @cached_property
    def subjects(self) -> tuple[str, ...]:
        """Analysed subjects: found minus excluded, in order."""
        excluded = self.study.subjects.exclude
        return tuple(s for s in self.found_subjects if s not in excluded)

    @cached_property
    def participants(self) -> dict[str, dict[str, str]]:
        """participants.tsv rows of a BIDS study (empty otherwise)."""
        if self.study.subjects.source != "bids":
            return {}
        return bids.read_participants(self.loaded.resolve(self.study.subjects.path))

    @cached_property
    def groups(self) -> dict[str, str]:
        """Group of each analysed subject that has one."""
        given = self.study.subjects.groups
        if given is None:
            given = {s: row["group"] for s, row in self.participants.items() if row.get("group") not in (None, "", "n/a")}
        return {s: given[s] for s in self.subjects if s in given}

    def covariate(self, name: str) -> dict[str, float]:
        """Values of one covariate for the analysed subjects."""
        given = (self.study.subjects.covariates or {}).get(name)
        where = f"{self.loaded.path.name} subjects.covariates.{name}"
        if given is None:
            if not self.participants:
                raise UserError(f"{where}: covariate '{name}' has no values (give subjects.covariates or a participants.tsv column)")
            where = f"participants.tsv column '{name}'"
            given = {}
            for subject, row in self.participants.items():
                if name not in row:
                    raise UserError(f"{where}: no such column (columns: {', '.join(row)})")
                given[subject] = row[name]
        values = {}
        for subject in self.subjects:
            raw = given.get(subject)
            try:
                values[subject] = float(raw)
            except (TypeError, ValueError):
                raise UserError(f"{where}: subject {subject} has no numeric value (found {raw!r})") from None
        return values

    def input_files(self, subject: str) -> list[str]:
        """Absolute input files of one subject's first stage."""
        spec = self.study.subjects
        if spec.source == "bids":
            root = self.loaded.resolve(spec.path)
            folder = root / f"sub-{subject}" / "eeg"
            files = sorted(str(p) for p in folder.glob(f"sub-{subject}_*") if spec.task is None or f"_task-{spec.task}_" in p.name)
            return files
        return [str(subject_file(self.loaded.folder, spec.path, subject))]

    def check_inputs(self) -> None:
        """Fail early, before any job runs, on missing subject files and groups."""
        spec = self.study.subjects
        name = self.loaded.path.name
        if not self.subjects:
            raise UserError(f"{name} subjects: every subject is excluded")
        for subject in self.subjects:
            files = self.input_files(subject)
            if spec.source == "bids":
                if not files:
                    raise UserError(f"subject {subject}: no recording in {self.loaded.resolve(spec.path) / f'sub-{subject}' / 'eeg'}")
            elif not Path(files[0]).is_file():
                raise UserError(f"subject {subject}: file not found: {files[0]} (from {name} subjects.path '{spec.path}')")
        for index, contrast in enumerate(self.study.contrasts):
            if contrast.test == "two-sample":
                present = sorted(set(self.groups.values()))
                for group in contrast.groups:
                    if group not in present:
                        raise UserError(
                            f"{name} contrasts[{index}].groups: no analysed subject is in group '{group}' (groups found: {', '.join(present) or 'none'})"
                        )
            if contrast.test == "correlation":
                self.covariate(contrast.covariate)
        if self.study.inference.family == "all-contrasts":
            self._check_shared_table()

    def _check_shared_table(self) -> None:
        """``family: all-contrasts`` needs one permutation table for every contrast."""
        scheme = {"one-sample": "sign-flip", "paired": "sign-flip", "two-sample": "label", "repeated-measures": "within-subject", "correlation": "covariate"}
        first = None
        for contrast in self.study.contrasts:
            settings = json.loads(self.contrast_settings(contrast.name))
            design = (scheme[contrast.test], tuple(settings["subjects"]), tuple(settings.get("groups") or ()), len(contrast.conditions) if contrast.test == "repeated-measures" else 0)
            if first is None:
                first = (contrast.name, design)
            elif design != first[1]:
                raise UserError(
                    f"{self.loaded.path.name} inference.family: 'all-contrasts' applies the same permutations to every contrast, "
                    f"but contrasts '{first[0]}' ({first[1][0]}, {len(first[1][1])} subjects) and '{contrast.name}' "
                    f"({design[0]}, {len(design[1])} subjects) cannot share them; use family: per-contrast"
                )

    def first_subject_channels(self) -> list[str] | None:
        """Channel names of the first analysed subject, read without decomposing (None if unknown)."""
        subject = self.subjects[0]
        if self.study.subjects.source == "bids":
            return bids.read_channel_names(self.loaded.resolve(self.study.subjects.path), subject, task=self.study.subjects.task)
        with np.load(self.input_files(subject)[0], allow_pickle=False) as archive:
            return [str(c) for c in archive["channels"]] if "channels" in archive.files else None

    def attainability_warnings(self) -> list[str]:
        """One line per contrast whose permutation table cannot reach alpha (naming the smallest p)."""
        from famwise.nulls.tables import make_table, smallest_attainable_p

        inference = self.study.inference
        if not inference.needs_null:
            return []
        warnings = []
        for contrast in self.study.contrasts:
            settings = json.loads(self.contrast_settings(contrast.name))
            n_conditions = len(contrast.conditions) if contrast.test == "repeated-measures" else None
            groups = settings.get("groups")
            table = make_table(
                contrast.test, n_subjects=len(settings["subjects"]), permutations=inference.permutations,
                seed=self.study.seed, groups=None if groups is None else np.asarray(groups), n_conditions=n_conditions,
            )
            tail = "greater" if contrast.test == "repeated-measures" else inference.tail
            smallest = smallest_attainable_p(table, tail=tail)
            if smallest > inference.alpha:
                kind = "all" if table.exact else "random"
                warnings.append(
                    f"contrast {contrast.name}: the smallest attainable permutation p is {smallest:.4g} "
                    f"({table.n_rows} {kind} {table.scheme} rows for {len(settings['subjects'])} subjects), above alpha "
                    f"{inference.alpha:g}: no permutation-based correction can declare anything; add subjects or permutations"
                )
        return warnings

    # ---- stage settings (plain JSON text for Snakemake params) ---------------

    @property
    def needs_graph(self) -> bool:
        """Whether a cluster or TFCE correction connects channels."""
        return any(c.method in ("cluster", "tfce") and "channel" in c.dims for c in self.study.inference.corrections)

    def decompose_settings(self) -> str:
        s = self.study
        return _json(
            {
                "source": s.subjects.source,
                "path": self.loaded.run_path(self.loaded.resolve(s.subjects.path)),
                "task": s.subjects.task,
                "min_epochs": s.subjects.min_epochs,
                "conditions": s.conditions,
                "epochs": s.epochs.model_dump(mode="json"),
                "timefreq": s.timefreq.model_dump(mode="json") | s.timefreq.morlet_width(),
            }
        )

    def graph_settings(self) -> str:
        s = self.study
        channels = s.channels.model_dump(mode="json")
        positions = s.channels.positions
        if positions not in ("standard-10-10", "standard-10-20", "bids"):
            channels["positions"] = self.loaded.run_path(self.loaded.resolve(positions))
        if s.channels.neighbors.edges_file:
            channels["neighbors"]["edges_file"] = self.loaded.run_path(self.loaded.resolve(s.channels.neighbors.edges_file))
        return _json({"channels": channels, "analysis_channels": s.analysis.channels, "bids_root": self._bids_root(), "task": s.subjects.task})

    def graph_inputs(self) -> list[str]:
        """Files the graph is built from (besides the first subject's map)."""
        s = self.study.channels
        files = []
        if s.positions not in ("standard-10-10", "standard-10-20", "bids"):
            files.append(self.loaded.run_path(self.loaded.resolve(s.positions)))
        if s.neighbors.method == "edges":
            files.append(self.loaded.run_path(self.loaded.resolve(s.neighbors.edges_file)))
        return files

    def _bids_root(self) -> str | None:
        if self.study.subjects.source != "bids":
            return None
        return self.loaded.run_path(self.loaded.resolve(self.study.subjects.path))

    def subjects_table_settings(self) -> str:
        s = self.study
        return _json({"found": list(self.found_subjects), "exclude": s.subjects.exclude, "groups": self.groups, "conditions": list(s.conditions)})

    def contrast(self, name: str):
        """The spec's contrast of that name."""
        return next(c for c in self.study.contrasts if c.name == name)

    def contrast_settings(self, name: str) -> str:
        contrast = self.contrast(name)
        subjects = list(self.subjects)
        extra = {}
        if contrast.test == "two-sample":
            subjects = [sub for sub in subjects if self.groups.get(sub) in contrast.groups]
            extra["groups"] = [contrast.groups.index(self.groups[sub]) for sub in subjects]
        if contrast.test == "correlation":
            values = self.covariate(contrast.covariate)
            extra["covariate"] = [values[sub] for sub in subjects]
        return _json(
            {
                "contrast": contrast.model_dump(mode="json"),
                "subjects": subjects,
                "analysis": self.study.analysis.model_dump(mode="json"),
                **extra,
            }
        )

    def contrast_inputs(self, name: str) -> list[str]:
        """Time-frequency files a contrast reads."""
        chosen = json.loads(self.contrast_settings(name))["subjects"]
        return [f"tf/sub-{s}.npz" for s in chosen]

    def statistic_settings(self) -> dict:
        i = self.study.inference
        return {"statistic": i.statistic, "trim": i.trim, "equal_var": i.equal_var, "tail": i.tail}

    def observed_settings(self) -> str:
        return _json(self.statistic_settings())

    def null_collectors(self) -> list[dict]:
        """What each correction needs from the permutation null (no levels: those do not change the null)."""
        collectors = []
        for c in self.study.inference.corrections:
            if not c.needs_null:
                continue
            if c.method == "max-stat":
                collectors.append({"key": c.label, "kind": "stepdown" if c.step_down else "maxstat"})
            elif c.method == "cluster":
                collectors.append(
                    {"key": c.label, "kind": "cluster", "cluster_stat": c.cluster_stat, "dims": c.dims, "min_neighbor_channels": c.min_neighbor_channels, **c.forming}
                )
            elif c.method == "tfce":
                collectors.append({"key": c.label, "kind": "tfce", "E": c.E, "H": c.H, "step": c.step, "dims": c.dims})
            else:
                collectors.append({"key": "exceed", "kind": "exceed"})
        unique = {json.dumps(c, sort_keys=True): c for c in collectors}
        return list(unique.values())

    def null_settings(self) -> str:
        i = self.study.inference
        return _json(
            {
                "seed": self.study.seed,
                "permutations": i.permutations,
                "shards": i.shards,
                "family": i.family,
                "collectors": self.null_collectors(),
                **self.statistic_settings(),
            }
        )

    def correction(self, label: str):
        """The spec's correction whose result folder is ``label``."""
        return next(c for c in self.study.inference.corrections if c.label == label)

    def correction_settings(self, label: str) -> str:
        i = self.study.inference
        c = self.correction(label)
        return _json({"correction": c.model_dump(mode="json") | {"label": label}, "alpha": i.alpha, "tail": i.tail, "family": i.family,
                      "contrasts": [x.name for x in self.study.contrasts], **({"forming": c.forming} if c.method == "cluster" else {})})

    def report_settings(self) -> str:
        return _json({"study": self.study.model_dump(mode="json"), "spec": self.loaded.run_path(self.loaded.path), "subjects": list(self.subjects)})

    # ---- files -------------------------------------------------------------------

    def shard_files(self, contrast: str) -> list[str]:
        if not self.study.inference.needs_null:
            return []
        return [f"contrasts/{contrast}/nulls/shard-{k}.npz" for k in range(self.study.inference.shards)]

    def correction_inputs(self, contrast: str, label: str) -> list[str]:
        """Observed maps and null shards a correction reads (every contrast's for all-contrasts)."""
        c = self.correction(label)
        contrasts = [contrast]
        if self.study.inference.family == "all-contrasts":
            contrasts = [x.name for x in self.study.contrasts]
        files = []
        for name in contrasts:
            files.append(f"contrasts/{name}/observed.npz")
            if c.needs_null:
                files.extend(self.shard_files(name))
        if c.method in ("cluster", "tfce"):
            files.append("channels/graph.npz")
        if self.study.inference.family == "all-contrasts" and c.method == "max-stat" and c.step_down and len(contrasts) > 1:
            files.extend(self.family_shard_files(label))
        return files

    def family_shard_files(self, label: str) -> list[str]:
        """Joint step-down shards of a family over every contrast."""
        return [f"family/{label}/shard-{k}.npz" for k in range(self.study.inference.shards)]

    def family_shard_inputs(self) -> dict[str, list[str]]:
        """Every contrast's data and observed map, in spec order (the order points are ranked in)."""
        names = [c.name for c in self.study.contrasts]
        return {
            "subjects": [f"contrasts/{n}/subjects.npz" for n in names],
            "observed": [f"contrasts/{n}/observed.npz" for n in names],
        }

    def stepdown_labels(self) -> list[str]:
        return [c.label for c in self.study.inference.corrections if c.method == "max-stat" and c.step_down]

    def result_files(self) -> list[str]:
        files = []
        for contrast in self.study.contrasts:
            for c in self.study.inference.corrections:
                files.append(f"contrasts/{contrast.name}/{c.label}/result.npz")
        return files

    def labels_with_cluster_table(self) -> list[str]:
        """Corrections that also write clusters.tsv: cluster inference and TFCE (its significant regions)."""
        return [c.label for c in self.study.inference.corrections if c.method in ("cluster", "tfce")]

    def final_files(self) -> list[str]:
        """Every file ``rule all`` asks for."""
        return ["report/index.html", "subjects.tsv", *self.result_files()]

