"""The serialisable search-space spec: what is searched, over which ranges, and why.

A space has unconditional parameters (``params``, e.g. ``prep.text_features``) and, optionally,
model families; choosing a family is the categorical parameter ``family`` and each family's
parameters are named ``<family>.<name>`` so they stay distinct (conditional search space).
Every decision carries a one-line ``reason`` so ``profile`` can explain the space.
A config is the flat dict a trial samples: ``{"family": "hist_gb", "hist_gb.learning_rate": 0.05, ...}``.
"""

from __future__ import annotations

import json
import math
from collections.abc import Mapping
from dataclasses import dataclass, field, replace
from typing import Any, Literal

import optuna
from optuna.distributions import (
    BaseDistribution,
    CategoricalDistribution,
    FloatDistribution,
    IntDistribution,
)

from tunelab.errors import InputError

ParamKind = Literal["float", "int", "categorical", "fixed"]
SPEC_VERSION = 1


@dataclass(frozen=True)
class ParamSpec:
    """One hyperparameter: its kind, range or choices, scale, and the reason for them."""

    kind: ParamKind
    low: float | None = None
    high: float | None = None
    log: bool = False
    choices: tuple[Any, ...] = ()
    value: Any = None
    reason: str = ""

    def __post_init__(self) -> None:
        if self.kind in ("float", "int"):
            if self.low is None or self.high is None or not self.low <= self.high:
                raise InputError(f"bad range [{self.low}, {self.high}] in search space", "low must be <= high")
            if self.log and self.low <= 0:
                raise InputError(f"log-scale range must be positive, got low={self.low}", "raise low above 0")
        elif self.kind == "categorical":
            if not self.choices:
                raise InputError("categorical parameter with no choices", "give at least one choice")
        elif self.kind != "fixed":
            raise InputError(f"unknown parameter kind '{self.kind}'", "use float, int, categorical or fixed")

    @property
    def bounds(self) -> tuple[float, float]:
        """``(low, high)`` of a float or int parameter (``__post_init__`` makes sure both are set)."""
        if self.low is None or self.high is None:
            raise TypeError(f"a {self.kind} parameter has no range")
        return self.low, self.high

    def distribution(self) -> BaseDistribution | None:
        """The optuna distribution, or None for a fixed value."""
        if self.kind == "float":
            low, high = self.bounds
            return FloatDistribution(float(low), float(high), log=self.log)
        if self.kind == "int":
            low, high = self.bounds
            return IntDistribution(int(low), int(high), log=self.log)
        if self.kind == "categorical":
            return CategoricalDistribution(list(self.choices))
        return None

    def suggest(self, trial: optuna.Trial, name: str) -> Any:
        if self.kind == "float":
            low, high = self.bounds
            return trial.suggest_float(name, float(low), float(high), log=self.log)
        if self.kind == "int":
            low, high = self.bounds
            return trial.suggest_int(name, int(low), int(high), log=self.log)
        if self.kind == "categorical":
            return trial.suggest_categorical(name, list(self.choices))
        return self.value

    def centre(self) -> Any:
        """A middle value: geometric mean on log scale, choice order for categoricals."""
        if self.kind == "fixed":
            return self.value
        if self.kind == "categorical":
            return self.choices[0]
        low, high = self.bounds
        mid = math.sqrt(low * high) if self.log else (low + high) / 2
        return int(round(mid)) if self.kind == "int" else float(mid)

    def to_dict(self) -> dict[str, Any]:
        out: dict[str, Any] = {"kind": self.kind}
        if self.kind in ("float", "int"):
            out.update(low=self.low, high=self.high, log=self.log)
        elif self.kind == "categorical":
            out["choices"] = list(self.choices)
        else:
            out["value"] = self.value
        if self.reason:
            out["reason"] = self.reason
        return out

    @classmethod
    def from_dict(cls, data: Mapping[str, Any]) -> ParamSpec:
        known = {"kind", "low", "high", "log", "choices", "value", "reason"}
        unknown = set(data) - known
        if unknown:
            raise InputError(f"unknown keys in parameter spec: {', '.join(sorted(unknown))}",
                             f"allowed keys: {', '.join(sorted(known))}")
        args = dict(data)
        if "choices" in args:
            args["choices"] = tuple(args["choices"])
        return cls(**args)


def fixed(value: Any, reason: str = "") -> ParamSpec:
    """A parameter held at one value (a frozen knob)."""
    return ParamSpec("fixed", value=value, reason=reason)


@dataclass(frozen=True)
class FamilySpec:
    """A model family and its own hyperparameters (names without the family prefix)."""

    params: Mapping[str, ParamSpec]
    reason: str = ""


@dataclass(frozen=True)
class SpaceSpec:
    """A whole search space; JSON round-trips through :meth:`to_json` / :meth:`from_json`."""

    params: Mapping[str, ParamSpec] = field(default_factory=dict)
    families: Mapping[str, FamilySpec] = field(default_factory=dict)
    warm_starts: tuple[Mapping[str, Any], ...] = ()
    notes: tuple[str, ...] = ()
    family_reason: str = ""
    trial_seconds: float | None = None  # the builder's estimate of a typical trial, from the cost probes
    dropped: tuple[str, ...] = ()  # families kept in the ``family`` choice but never sampled (see ``freeze``)
    # Rows as a fidelity: the sample shares of the first fold's rungs (``tunelab.evaluation``'s row
    # ladder), or none; ``run`` copies them into the study's settings, which the engine reads.
    row_shares: tuple[float, ...] = ()

    @property
    def kept_families(self) -> list[str]:
        """The families sampling may return: all of them but the dropped ones."""
        return [name for name in self.families if name not in self.dropped]

    def sample(self, trial: optuna.Trial) -> dict[str, Any]:
        """Draw one config through the trial (TPE sees the conditional structure)."""
        config: dict[str, Any] = {}
        for name, spec in self.params.items():
            config[name] = spec.suggest(trial, name)
        if self.families:
            names = list(self.families)
            family = trial.suggest_categorical("family", names) if len(names) > 1 else names[0]
            config["family"] = family
            for pname, spec in self.families[family].params.items():
                full = f"{family}.{pname}"
                config[full] = spec.suggest(trial, full)
        return config

    def complete(self, params: Mapping[str, Any]) -> dict[str, Any]:
        """A trial's sampled params plus what the space fixed without sampling (one family, frozen knobs)."""
        config = dict(params)
        for name, spec in self.params.items():
            if spec.kind == "fixed":
                config.setdefault(name, spec.value)
        if self.families:
            family = config.setdefault("family", next(iter(self.families)))
            if family in self.families:
                for pname, spec in self.families[family].params.items():
                    if spec.kind == "fixed":
                        config.setdefault(f"{family}.{pname}", spec.value)
        return config

    def searched(self) -> dict[str, ParamSpec]:
        """Every searched parameter by full name (``family`` included when there is a choice; fixed ones left out)."""
        out: dict[str, ParamSpec] = {name: spec for name, spec in self.params.items() if spec.kind != "fixed"}
        if len(self.families) > 1:
            out["family"] = ParamSpec("categorical", choices=tuple(self.families))
        for family, fspec in self.families.items():
            for pname, spec in fspec.params.items():
                if spec.kind != "fixed":
                    out[f"{family}.{pname}"] = spec
        return out

    def distributions(self) -> dict[str, BaseDistribution]:
        """Every searched parameter's optuna distribution (fixed ones left out)."""
        return {name: dist for name, spec in self.searched().items() if (dist := spec.distribution()) is not None}

    def lookup(self, name: str) -> ParamSpec | None:
        """The spec of a full parameter name (``prep.x``, ``family``, ``hist_gb.learning_rate``)."""
        if name in self.params:
            return self.params[name]
        if name == "family" and self.families:
            return ParamSpec("categorical", choices=tuple(self.families))
        family, _, pname = name.partition(".")
        if family in self.families and pname in self.families[family].params:
            return self.families[family].params[pname]
        return None

    def freeze(self, values: Mapping[str, Any], reason: str, drop: tuple[str, ...] = ()) -> SpaceSpec:
        """A narrowed copy: each named parameter held at its value (``family`` keeps one family), and
        the families in ``drop`` dropped.

        A dropped family stays a choice of ``family``: the trial tables refuse a parameter whose
        choices change, so the space records it as dropped and the sampler never returns it.
        """
        unknown = [name for name in drop if name not in self.families]
        if unknown:
            raise InputError(f"cannot drop unknown famil{'ies' if len(unknown) > 1 else 'y'} {', '.join(unknown)}",
                             f"families are: {', '.join(self.families)}")
        if drop and not [name for name in self.kept_families if name not in drop]:
            raise InputError("cannot drop every family", "keep at least one family in the search")
        params = dict(self.params)
        families = {k: FamilySpec(dict(v.params), v.reason) for k, v in self.families.items()}
        for name, value in values.items():
            if self.lookup(name) is None:
                raise InputError(f"unknown parameter '{name}'",
                                 f"parameters are: {', '.join(sorted(self.distributions()))}")
            if name == "family":
                if value not in families:
                    raise InputError(f"unknown family '{value}'", f"families are: {', '.join(families)}")
                families = {value: families[value]}
            elif name in params:
                params[name] = fixed(value, reason)
            else:
                family, _, pname = name.partition(".")
                if family in families:
                    inner = dict(families[family].params)
                    inner[pname] = fixed(value, reason)
                    families[family] = FamilySpec(inner, families[family].reason)
        dropped = tuple(name for name in families if name in {*self.dropped, *drop})
        return replace(self, params=params, families=families, warm_starts=(), dropped=dropped)

    def to_dict(self) -> dict[str, Any]:
        return {
            "version": SPEC_VERSION,
            "params": {k: v.to_dict() for k, v in self.params.items()},
            "families": {
                k: {"reason": v.reason, "params": {p: s.to_dict() for p, s in v.params.items()}}
                for k, v in self.families.items()
            },
            "family_reason": self.family_reason,
            "warm_starts": [dict(w) for w in self.warm_starts],
            "notes": list(self.notes),
            **({"trial_seconds": self.trial_seconds} if self.trial_seconds is not None else {}),
            **({"dropped": list(self.dropped)} if self.dropped else {}),
            **({"row_shares": list(self.row_shares)} if self.row_shares else {}),
        }

    def to_json(self) -> str:
        return json.dumps(self.to_dict(), indent=2, sort_keys=False)

    @classmethod
    def from_dict(cls, data: Mapping[str, Any]) -> SpaceSpec:
        version = data.get("version", SPEC_VERSION)
        if version > SPEC_VERSION:
            raise InputError(f"search space spec version {version} is newer than this tunelab understands",
                             "upgrade tunelab")
        families = {
            name: FamilySpec({p: ParamSpec.from_dict(s) for p, s in f.get("params", {}).items()}, f.get("reason", ""))
            for name, f in data.get("families", {}).items()
        }
        return cls(
            params={k: ParamSpec.from_dict(v) for k, v in data.get("params", {}).items()},
            families=families,
            warm_starts=tuple(data.get("warm_starts", ())),
            notes=tuple(data.get("notes", ())),
            family_reason=data.get("family_reason", ""),
            trial_seconds=data.get("trial_seconds"),
            dropped=tuple(data.get("dropped", ())),
            row_shares=tuple(float(x) for x in data.get("row_shares", ())),
        )

    @classmethod
    def from_json(cls, text: str) -> SpaceSpec:
        try:
            data = json.loads(text)
        except json.JSONDecodeError as exc:
            raise InputError(f"search space is not valid JSON: {exc.msg} at line {exc.lineno}",
                             "fix the JSON, or write a fresh one with `tunelab profile --write-space`") from exc
        if not isinstance(data, dict):
            raise InputError("search space JSON must be an object", "see `tunelab profile --write-space`")
        return cls.from_dict(data)
