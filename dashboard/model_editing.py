"""Model editing on the drawing board's state: parameter moves, formulas, families, uploaded field
data and the mixture weights as used; each builds a scenario and refits only if it is valid."""
from __future__ import annotations

import re

from lifedraw.engine import ModelError
from lifedraw.engine.scenarios import Scenario, scenario_from_dict

from .model_inputs import FORMULA_KINDS, parse_assignments, parse_mission_times, parse_support, parse_time_unit


class ModelEditing:
    """What the user does to the model (a part of DrawingBoard, which holds the state)."""

    def set_value(self, name: str, value) -> bool:
        """Move one parameter: refit and restart the stream, or keep the last model and say why."""
        return self.set_values(**{name: value})

    def set_values(self, **values) -> bool:
        sc = self._guard("parameters", lambda: self.scenario.with_values(**values))
        if sc is None:
            return False
        return self._rebuild(sc, "parameters")

    def apply_formula(self, kind: str, expr: str, support: str = "0, inf", params: str = "") -> bool:
        """Replace the model by a density, hazard or CDF formula in t with named parameters."""
        def build():
            k = str(kind).strip().lower()
            if k not in FORMULA_KINDS:
                raise ModelError("kind", f"must be one of {', '.join(FORMULA_KINDS)}, got {kind!r}")
            if not str(expr).strip():
                raise ModelError("formula", "is empty; write a function of t, e.g. exp(-t/1000)")
            values = parse_assignments(params)
            model = {"kind": k, "expr": str(expr).strip(), "support": parse_support(support)}
            return self._custom_scenario(model, values, f"{k} formula")

        sc = self._guard("model", build)
        return sc is not None and self._adopt_custom(sc, "model")

    def apply_family(self, family: str, params: str) -> bool:
        """Replace the model by a textbook family; each of its parameters gets a slider."""
        def build():
            from lifedraw.engine.families import FAMILIES
            key = str(family or "").strip().lower().replace("-", "_").replace(" ", "_")
            if not key:
                raise ModelError("family", "choose a family from the menu")
            if key not in FAMILIES:
                raise ModelError("family", f"unknown family {family!r}; known: {', '.join(sorted(FAMILIES))}")
            values = parse_assignments(params)
            known = [p.name for p in FAMILIES[key].params]
            for name in values:
                if name not in known:
                    raise ModelError("parameters", f"{name!r} is not a parameter of the "
                                                   f"{FAMILIES[key].title} family ({', '.join(known)})")
            model = {"kind": "family", "family": key, "params": {k: k for k in values}}
            return self._custom_scenario(model, values, f"{FAMILIES[key].title} family")

        sc = self._guard("model", build)
        return sc is not None and self._adopt_custom(sc, "model")

    def load_field_data(self, data, filename: str = "field data.csv", time_unit: str | None = None,
                        mission_times: str | None = None) -> bool:
        """Use uploaded CSV field data (failure times with suspensions, or binned counts) as the model,
        with the time unit and mission times the user gives for it (else the current ones).
        The page runs the two steps before ``adopt_field_data`` in a worker thread instead."""
        sc = self._guard("upload", self.field_data_scenario, data, filename, time_unit, mission_times)
        built = sc and self._guard("upload", self.fit_model, sc, "auto")
        return built is not None and self.adopt_field_data(sc, built)

    def field_data_scenario(self, data, filename: str, time_unit: str | None = None,
                            mission_times: str | None = None) -> Scenario:
        """The scenario of uploaded field data (parsed and checked; raises ModelError). Changes nothing.
        ``time_unit`` and ``mission_times`` are what the user typed in the upload area."""
        from lifedraw.engine.field_io import read_binned_csv, read_failure_csv, sniff_layout
        unit = parse_time_unit(time_unit) if time_unit is not None else self.scenario.time_unit
        missions = (parse_mission_times(mission_times) if mission_times is not None
                    else list(self.scenario.mission_times))
        if sniff_layout(data) == "binned":
            edges, counts = read_binned_csv(data)
            model = {"kind": "histogram", "edges": edges.tolist(), "counts": counts.tolist(), "smooth": False}
            what = f"{counts.size} bins, {counts.sum():g} failures"
        else:
            times, censored = read_failure_csv(data)
            model = {"kind": "failures", "times": times.tolist(), "censored": censored.tolist()}
            what = f"{int((~censored).sum())} failures, {int(censored.sum())} suspensions"
        data_dict = {"title": f"Field data from {filename}",
                     "story": f"Uploaded field data ({what}), ages in {unit}.",
                     "time_unit": unit, "model": model,
                     "run": {"method": "auto", "seed": self.seed, "sample_size": self.scenario.sample_size,
                             "mission_times": missions, "tolerance": float(self.tolerance)}}
        stem = re.sub(r"[^A-Za-z0-9_-]+", "-", str(filename).rsplit(".", 1)[0]).strip("-") or "field-data"
        return scenario_from_dict(data_dict, stem)

    def adopt_field_data(self, sc: Scenario, built: tuple) -> bool:
        """Make the uploaded field data (``sc``, fitted as ``built`` by ``fit_model(sc, "auto")``) the model."""
        saved = self.method
        with self._quiet():
            self.method = "auto"
        if self._adopt_custom(sc, "upload", built):
            return True
        with self._quiet():
            self.method = saved
        return False

    def _adopt_custom(self, sc: Scenario, field: str, built: tuple | None = None) -> bool:
        """Use a scenario made in this session, and offer it in the scenario picker."""
        previous, known = self.scenario_name, self.custom.get(sc.name)
        self.custom[sc.name] = sc
        if sc.name not in self.param.scenario_name.objects:
            self.param.scenario_name.objects = [*self.param.scenario_name.objects, sc.name]
        with self._quiet():
            self.scenario_name = sc.name
        if self._rebuild(sc, field, built):
            return True
        with self._quiet():
            self.scenario_name = previous
        if known is None:
            del self.custom[sc.name]
        else:
            self.custom[sc.name] = known
        return False

    def _custom_scenario(self, model: dict, values: dict[str, float], what: str) -> Scenario:
        base = self.scenario
        params = {}
        for name, v in values.items():
            old = base.parameters.get(name)
            if old is not None and old.low <= v <= old.high:
                params[name] = {"value": v, "min": old.low, "max": old.high, "step": old.step,
                                **({"label": old.label} if old.label else {})}
            else:
                params[name] = v   # the scenario loader gives it a range around the value
        original = base.title.split(" — ")[0]
        # Say the model was edited; keep the original scenario's story, marked as such.
        marker = "The story of the original scenario: "
        original_story = base.story.split(marker, 1)[1] if marker in base.story else base.story.strip()
        story = (f"Edited in this session: the model is now a {what} typed in the editor, not the scenario's "
                 f"own model. {marker}{original_story}")
        data = {"title": f"{original} — edited model ({what})",
                "story": story, "time_unit": base.time_unit, "parameters": params, "model": model,
                "run": {"method": self.method, "seed": self.seed, "sample_size": base.sample_size,
                        "mission_times": list(base.mission_times), "tolerance": float(self.tolerance)}}
        name = base.name if base.name.endswith("-edited") else f"{base.name}-edited"
        return scenario_from_dict(data, name)

    def effective_weights(self) -> list[dict]:
        """For a mixture: each weight as set (slider or fixed number) and as used, rescaled to add up to 1."""
        model = self.scenario.model
        if model.get("kind") != "mixture" or not hasattr(self.target, "weights"):
            return []
        out = []
        for i, (raw, used) in enumerate(zip(model.get("weights", []), self.target.weights)):
            if isinstance(raw, str) and raw in self.scenario.parameters:
                p = self.scenario.parameters[raw]
                out.append({"name": raw, "label": p.label or raw, "set": float(self.values.get(raw, p.value)),
                            "used": float(used)})
            else:
                out.append({"name": None, "label": f"component {i + 1} (fixed)", "set": float(raw),
                            "used": float(used)})
        return out

