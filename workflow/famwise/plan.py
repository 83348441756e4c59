"""What a study run consists of: subjects, stages, their settings and files.

The Snakemake rules and ``famwise check`` both read this plan. It is the only
reader of the spec model: each stage's settings (a type of
``famwise.settings``) hold only what that stage depends on; the rules pass
them as JSON text, so that Snakemake's params trigger reruns exactly what
changed. Paths come from ``famwise.layout``.
"""

from dataclasses import dataclass
from functools import cached_property
from pathlib import Path

import numpy as np

from famwise import bids, covariates, layout
from famwise.errors import UserError
from famwise.io import discover_pattern, subject_file
from famwise.settings import (
    ClusterNullSettings,
    ContrastSettings,
    CorrectionEntry,
    CorrectionSettings,
    DecomposeSettings,
    ExceedanceNullSettings,
    FormingSettings,
    GraphSettings,
    MaxStatNullSettings,
    NullSettings,
    ObservedSettings,
    ReportSettings,
    StepDownNullSettings,
    StudyRecordSettings,
    SubjectsTableSettings,
    SubjectValuesSettings,
    TFCENullSettings,
)
from famwise.settings_codec import from_plain
from famwise.spec import LoadedStudy, load_study
from famwise.spec.base import IDENTIFIER

GROUP_TESTS = ("two-sample", "between-groups")
"""Tests that compare the spec's groups (each subject's group index in the contrast's settings)."""


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
            raise UserError(
                f"{self.loaded.path.name} subjects.path: no subject data found for '{spec.path}' in {self.loaded.folder}"
            )
        for subject in found:
            if not IDENTIFIER.match(subject):
                raise UserError(
                    f"subject '{subject}' found in {spec.path} is not a plain identifier (letters and digits only); rename its files"
                )
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
            given = {
                s: row["group"] for s, row in self.participants.items() if row.get("group") not in (None, "", "n/a")
            }
        return {s: given[s] for s in self.subjects if s in given}

    def covariate(self, name: str) -> dict[str, float]:
        """Values of one numeric covariate for the analysed subjects (`famwise.covariates`)."""
        return covariates.numeric_values(self, name)

    def regression_design(self, name: str):
        """The coded design (`famwise.stats.coding.CodedDesign`) of a regression contrast; UserError on bad values."""
        return covariates.regression_design(self, name)

    def input_files(self, subject: str) -> list[str]:
        """Absolute input files of one subject's first stage."""
        spec = self.study.subjects
        if spec.source == "bids":
            return [str(p) for p in bids.subject_files(self.loaded.resolve(spec.path), subject, task=spec.task)]
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
                    folders = " or ".join(f"sub-{subject}/{f}" for f in bids.RECORDING_FOLDERS)
                    raise UserError(f"subject {subject}: no recording in {folders} of {self.loaded.resolve(spec.path)}")
            elif not Path(files[0]).is_file():
                raise UserError(
                    f"subject {subject}: file not found: {files[0]} (from {name} subjects.path '{spec.path}')"
                )
        for index, contrast in enumerate(self.study.contrasts):
            if contrast.test in GROUP_TESTS:
                present = sorted(set(self.groups.values()))
                for group in contrast.groups:
                    if group not in present:
                        raise UserError(
                            f"{name} contrasts[{index}].groups: no analysed subject is in group '{group}' (groups found: {', '.join(present) or 'none'})"
                        )
            if contrast.test == "correlation":
                self.covariate(contrast.covariate)
            if contrast.test == "regression":
                self.regression_design(contrast.name)
        if self.study.inference.family == "all-contrasts":
            self._check_shared_table()

    def _check_shared_table(self) -> None:
        """``family: all-contrasts`` needs one permutation table for every contrast."""
        scheme = {
            "one-sample": "sign-flip",
            "paired": "sign-flip",
            "weighted": "sign-flip",
            "two-sample": "label",
            "between-groups": "label",
            "repeated-measures": "within-subject",
            "correlation": "covariate",
            "regression": "freedman-lane",
        }
        first = None
        for contrast in self.study.contrasts:
            settings = self.contrast_settings(contrast.name)
            design = (
                scheme[contrast.test],
                settings.subjects,
                settings.groups or (),
                len(contrast.conditions) if contrast.test == "repeated-measures" else 0,
            )
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
            return bids.read_channel_names(
                self.loaded.resolve(self.study.subjects.path), subject, task=self.study.subjects.task
            )
        with np.load(self.input_files(subject)[0], allow_pickle=False) as archive:
            return [str(c) for c in archive["channels"]] if "channels" in archive.files else None

    # ---- stage settings (famwise.settings types; rules pass them as JSON text) ----

    @property
    def needs_graph(self) -> bool:
        """Whether a cluster or TFCE correction connects channels."""
        return any(c.method in ("cluster", "tfce") and "channel" in c.dims for c in self.study.inference.corrections)

    def decompose_settings(self) -> DecomposeSettings:
        s = self.study
        return from_plain(
            DecomposeSettings,
            {
                "source": s.subjects.source,
                "path": self.loaded.run_path(self.loaded.resolve(s.subjects.path)),
                "task": s.subjects.task,
                "min_epochs": s.subjects.min_epochs,
                "conditions": s.conditions,
                "epochs": s.epochs.model_dump(mode="json"),
                "decomposition": s.decomposition.model_dump(mode="json"),
            },
        )

    def graph_settings(self) -> GraphSettings:
        s = self.study
        positions = s.channels.positions
        if positions not in ("10-10", "10-20", "bids"):
            positions = self.loaded.run_path(self.loaded.resolve(positions))
        neighbors = s.channels.neighbors.model_dump(mode="json")
        if neighbors["edges_file"]:
            neighbors["edges_file"] = self.loaded.run_path(self.loaded.resolve(neighbors["edges_file"]))
        return from_plain(
            GraphSettings,
            {
                "positions": positions,
                "neighbors": neighbors,
                "analysis_channels": s.analysis.channels,
                "bids_root": self._bids_root(),
                "task": s.subjects.task,
            },
        )

    def graph_inputs(self) -> list[str]:
        """Files the graph is built from (besides the first subject's map)."""
        s = self.study.channels
        files = []
        if s.positions not in ("10-10", "10-20", "bids"):
            files.append(self.loaded.run_path(self.loaded.resolve(s.positions)))
        if s.neighbors.method == "edges":
            files.append(self.loaded.run_path(self.loaded.resolve(s.neighbors.edges_file)))
        return files

    def _bids_root(self) -> str | None:
        if self.study.subjects.source != "bids":
            return None
        return self.loaded.run_path(self.loaded.resolve(self.study.subjects.path))

    def subjects_table_settings(self) -> SubjectsTableSettings:
        s = self.study
        return SubjectsTableSettings(
            found=self.found_subjects,
            exclude=dict(s.subjects.exclude),
            groups=self.groups,
            conditions=tuple(s.conditions),
        )

    def contrast(self, name: str):
        """The spec's contrast of that name."""
        return next(c for c in self.study.contrasts if c.name == name)

    def contrast_settings(self, name: str) -> ContrastSettings:
        contrast = self.contrast(name)
        subjects = list(self.subjects)
        groups = covariate = None
        if contrast.test in GROUP_TESTS:
            subjects = [sub for sub in subjects if self.groups.get(sub) in contrast.groups]
            groups = [contrast.groups.index(self.groups[sub]) for sub in subjects]
        if contrast.test == "correlation":
            values = self.covariate(contrast.covariate)
            covariate = [values[sub] for sub in subjects]
        regression = {}
        if contrast.test == "regression":
            coded = self.regression_design(name)
            covariate = coded.covariate
            regression = {
                "nuisance": coded.nuisance,
                "nuisance_columns": coded.nuisance_columns,
                "design_terms": coded.terms,
            }
        return from_plain(
            ContrastSettings,
            {
                "name": contrast.name,
                "test": contrast.test,
                "conditions": contrast.conditions,
                "subjects": subjects,
                "analysis": self.study.analysis.model_dump(mode="json"),
                "groups": groups,
                "covariate": covariate,
                **regression,
                "weights": contrast.weights,
            },
        )

    def contrast_inputs(self, name: str) -> list[str]:
        """Time-frequency files a contrast reads."""
        return [layout.tf_map(s) for s in self.contrast_settings(name).subjects]

    def _statistic(self) -> dict:
        i = self.study.inference
        return {"statistic": i.statistic, "trim": i.trim, "equal_var": i.equal_var, "tail": i.tail}

    def observed_settings(self) -> ObservedSettings:
        forming = tuple(
            FormingSettings(label=c.label, forming_p=c.forming_p, forming_stat=c.forming_stat)
            for c in self.study.inference.corrections
            if c.method == "cluster"
        )
        return ObservedSettings(
            **self._statistic(), forming=forming, degenerate_points=self.study.inference.degenerate_points
        )

    def null_collectors(self) -> tuple:
        """What each correction needs from the permutation null (no levels: those do not change the null)."""
        collectors = []
        for c in self.study.inference.corrections:
            if not c.needs_null:
                continue
            if c.method == "max-stat":
                collectors.append((StepDownNullSettings if c.step_down else MaxStatNullSettings)(key=c.label))
            elif c.method == "cluster":
                collectors.append(
                    ClusterNullSettings(
                        key=c.label,
                        cluster_stat=c.cluster_stat,
                        dims=tuple(c.dims),
                        min_supra_neighbors=c.min_supra_neighbors,
                    )
                )
            elif c.method == "tfce":
                collectors.append(TFCENullSettings(key=c.label, E=c.E, H=c.H, step=c.step, dims=tuple(c.dims)))
            else:
                collectors.append(ExceedanceNullSettings(key="exceed"))
        return tuple(dict.fromkeys(collectors))

    def null_settings(self) -> NullSettings:
        i = self.study.inference
        return NullSettings(
            seed=self.study.seed,
            permutations=i.permutations,
            shards=i.shards,
            family=i.family,
            collectors=self.null_collectors(),
            **self._statistic(),
        )

    def correction(self, label: str):
        """The spec's correction whose result folder is ``label``."""
        return next(c for c in self.study.inference.corrections if c.label == label)

    def correction_settings(self, label: str) -> CorrectionSettings:
        i = self.study.inference
        entry = from_plain(CorrectionEntry, self.correction(label).model_dump(mode="json") | {"label": label})
        return CorrectionSettings(
            correction=entry,
            alpha=i.alpha,
            tail=i.tail,
            family=i.family,
            contrasts=tuple(x.name for x in self.study.contrasts),
        )

    def subject_values_settings(self, name: str) -> SubjectValuesSettings:
        contrast = self.contrast(name)
        regions = [r.model_dump(mode="json") for r in self.study.planned_regions]
        return from_plain(
            SubjectValuesSettings,
            {
                "test": contrast.test,
                "conditions": contrast.conditions,
                "group_names": contrast.groups if contrast.test in GROUP_TESTS else None,
                "covariate_name": contrast.covariate if contrast.test in ("correlation", "regression") else None,
                "regions": regions,
                "weights": contrast.weights,
            },
        )

    def subject_value_files(self) -> list[str]:
        """Every subject-values table and sidecar: per cluster or TFCE correction, and per planned regions."""
        tables = [
            layout.subject_values(c.name, label)
            for c in self.study.contrasts
            for label in self.labels_with_cluster_table()
        ]
        if self.study.planned_regions:
            tables += [layout.planned_values(c.name) for c in self.study.contrasts]
        return [f for table in tables for f in (table, layout.sidecar_of(table))]

    def study_record_settings(self) -> StudyRecordSettings:
        return StudyRecordSettings(study=self.study.model_dump(mode="json"))

    def report_settings(self) -> ReportSettings:
        """The spec's path and every file the study reads, by the name the spec gives it (hashed in the provenance)."""
        from famwise.handoff.inputs import study_files

        inputs = {name: self.loaded.run_path(path) for name, path in study_files(self).all.items()}
        return ReportSettings(spec=self.loaded.run_path(self.loaded.path), input_files=inputs)

    # ---- files -------------------------------------------------------------------

    def shard_files(self, contrast: str) -> list[str]:
        if not self.study.inference.needs_null:
            return []
        return [layout.null_shard(contrast, k) for k in range(self.study.inference.shards)]

    def correction_inputs(self, contrast: str, label: str) -> list[str]:
        """Observed maps and null shards a correction reads (every contrast's for all-contrasts)."""
        c = self.correction(label)
        contrasts = [contrast]
        if self.study.inference.family == "all-contrasts":
            contrasts = [x.name for x in self.study.contrasts]
        files = []
        for name in contrasts:
            files.append(layout.observed(name))
            if c.needs_null:
                files.extend(self.shard_files(name))
        if c.method in ("cluster", "tfce"):
            files.append(layout.CHANNEL_GRAPH)
        if (
            self.study.inference.family == "all-contrasts"
            and c.method == "max-stat"
            and c.step_down
            and len(contrasts) > 1
        ):
            files.extend(self.family_shard_files(label))
        return files

    def family_shard_files(self, label: str) -> list[str]:
        """Joint step-down shards of a family over every contrast."""
        return [layout.family_shard(label, k) for k in range(self.study.inference.shards)]

    def family_shard_inputs(self) -> dict[str, list[str]]:
        """Every contrast's data and observed map, in spec order (the order points are ranked in)."""
        names = [c.name for c in self.study.contrasts]
        return {
            "subjects": [layout.contrast_data(n) for n in names],
            "observed": [layout.observed(n) for n in names],
        }

    def stepdown_labels(self) -> list[str]:
        return [c.label for c in self.study.inference.corrections if c.method == "max-stat" and c.step_down]

    def result_files(self) -> list[str]:
        files = []
        for contrast in self.study.contrasts:
            for c in self.study.inference.corrections:
                files.append(layout.result(contrast.name, c.label))
        return files

    def labels_with_cluster_table(self) -> list[str]:
        """Corrections that also write clusters.tsv: cluster inference and TFCE (its significant regions)."""
        return [c.label for c in self.study.inference.corrections if c.method in ("cluster", "tfce")]

    def report_inputs(self) -> list[str]:
        """Every file the report reads (the spec, whose text it shows, included), and the calibration and power files when they exist.

        ``famwise calibrate`` and ``famwise power`` plan the workflow again
        afterwards, so the report then reruns because its inputs changed.
        """
        report = self.report_settings()
        files = [
            report.spec,
            layout.STUDY_RECORD,
            layout.SUBJECTS_TABLE,
            *report.input_files.values(),
            *self.subject_value_files(),
        ]
        if self.needs_graph:
            files.append(layout.CHANNEL_GRAPH)
        with_table = set(self.labels_with_cluster_table())
        for contrast in self.study.contrasts:
            files.append(layout.observed(contrast.name))
            if self.study.inference.needs_null:
                files.append(layout.null_info(contrast.name))
            for c in self.study.inference.corrections:
                files.append(layout.result(contrast.name, c.label))
                if c.label in with_table:
                    files += [
                        layout.cluster_table(contrast.name, c.label),
                        layout.cluster_sidecar(contrast.name, c.label),
                    ]
            calibration = layout.calibration_files(contrast.name)
            if (self.loaded.output / calibration["table"]).is_file():
                files += [*calibration.values(), layout.contrast_data(contrast.name)]
            power = layout.power_files(contrast.name)
            if (self.loaded.output / power["table"]).is_file():
                files += power.values()
        return files

    def final_files(self) -> list[str]:
        """Every file ``rule all`` asks for."""
        return [layout.REPORT_PAGE, layout.SUBJECTS_TABLE, *self.result_files()]
