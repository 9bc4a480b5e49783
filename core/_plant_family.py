"""Plant families: a plant file whose matrices depend on uncertain parameters.

A plant file may add a ``[parameters]`` table (each parameter with a nominal value and a
uniform range or a normal spread) and ``[[operating_points]]`` (named sets of parameter
values), and write matrix entries as expressions of the parameters (``"-spring / mass"``,
checked by :mod:`._expressions`). The *nominal* model — every parameter at its nominal value —
is what :func:`load_plant_file` returns and every single-model command uses, so a plant file
without these tables means exactly what it meant before.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np
import scipy.special

from ._errors import PlantError
from ._expressions import parse_expression
from ._plant import Plant

__all__ = [
    "Parameter",
    "OperatingPoint",
    "FamilyModel",
    "PlantFamily",
    "plant_family_from_mapping",
    "parse_plant_family_text",
    "load_plant_family_file",
]

#: The matrices whose entries may be expressions of the parameters.
EXPRESSION_MATRICES = ("A", "B", "C", "D")
#: Name of the nominal model among a family's models; no operating point may take it.
NOMINAL_NAME = "nominal"
_PARAMETER_KEYS = {"nominal", "low", "high", "std", "unit", "description"}
_POINT_KEYS = {"name", "values", "description"}
_MAX_PARAMETERS = 64
_MAX_OPERATING_POINTS = 64


def _finite_number(value, where: str) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise PlantError(f"{where} must be a finite number, got {value!r}")
    return float(value)


@dataclass(frozen=True)
class Parameter:
    """One uncertain physical parameter of a plant family.

    Attributes
    ----------
    name : str
        The name used in matrix expressions (a Python-style identifier).
    nominal : float
        The value of the nominal model.
    low, high : float or None
        Range: sampled uniformly when ``std`` is None, else the truncation of the normal spread.
    std : float or None
        Standard deviation of a normal spread around ``nominal``.
    unit, description : str
        For people: the unit and where the uncertainty comes from.
    """

    name: str
    nominal: float
    low: float | None = None
    high: float | None = None
    std: float | None = None
    unit: str = ""
    description: str = ""

    @property
    def varies(self) -> bool:
        """Whether sampling moves this parameter (a range or a nonzero spread)."""
        if self.std is not None:
            return self.std > 0
        return self.low is not None and self.high is not None and self.high > self.low

    @property
    def distribution(self) -> str:
        """``"uniform"``, ``"normal"``, ``"truncated normal"`` or ``"fixed"``."""
        if self.std is not None and self.std > 0:
            return "truncated normal" if (self.low is not None or self.high is not None) else "normal"
        return "uniform" if self.varies else "fixed"

    @property
    def sweep_range(self) -> tuple[float, float]:
        """The range searched for a stability boundary: [low, high], or nominal ± 4 std."""
        low = self.low if self.low is not None else self.nominal - 4 * (self.std or 0.0)
        high = self.high if self.high is not None else self.nominal + 4 * (self.std or 0.0)
        return float(low), float(high)

    def from_unit_interval(self, u: np.ndarray) -> np.ndarray:
        """Map uniform numbers u in (0, 1) to this parameter's distribution (inverse CDF).

        One uniform number per sample and parameter, whatever the distribution, keeps the
        random stream — and so the result — the same for a given seed.
        """
        u = np.asarray(u, dtype=float)
        kind = self.distribution
        if kind == "fixed":
            return np.full(u.shape, self.nominal)
        if kind == "uniform":
            return self.low + (self.high - self.low) * u
        # normal, truncated to [low, high] by drawing u within [Φ(a), Φ(b)]
        a = -np.inf if self.low is None else (self.low - self.nominal) / self.std
        b = np.inf if self.high is None else (self.high - self.nominal) / self.std
        lower, upper = scipy.special.ndtr(a), scipy.special.ndtr(b)
        values = self.nominal + self.std * scipy.special.ndtri(lower + (upper - lower) * u)
        # rounding in ndtri can step a hair past a truncation end: clip to it
        return np.clip(values, self.low if self.low is not None else -np.inf,
                       self.high if self.high is not None else np.inf)


@dataclass(frozen=True)
class OperatingPoint:
    """A named set of parameter values, e.g. one payload or one linearisation speed.

    Attributes
    ----------
    name : str
    values : dict
        Parameter name → value; parameters not listed take their nominal value.
    description : str
    """

    name: str
    values: dict
    description: str = ""


@dataclass(frozen=True, eq=False)
class FamilyModel:
    """One model of a family: its name, every parameter's value, and the checked plant."""

    name: str
    values: dict
    plant: Plant


@dataclass(frozen=True)
class MatrixStacks:
    """The matrices of many parameter samples at once (see :meth:`PlantFamily.matrix_stacks`).

    Attributes
    ----------
    A : ndarray, shape (N, n, n)
    B : ndarray, shape (N, n, m)
    evaluable : ndarray of bool, shape (N,)
        False where some entry is not finite (division by zero, log of a negative number...);
        those samples' matrices are not meaningful.
    first_bad_entry : tuple of str
        Per sample, the first entry that could not be evaluated ("" when evaluable).
    """

    A: np.ndarray
    B: np.ndarray
    evaluable: np.ndarray
    first_bad_entry: tuple = field(repr=False, default=())


@dataclass(frozen=True, eq=False)
class PlantFamily:
    """A plant whose matrices depend on parameters, with its operating points.

    Attributes
    ----------
    nominal : Plant
        Every parameter at its nominal value: the model every single-model command uses.
    parameters : tuple of Parameter
    operating_points : tuple of OperatingPoint
    expressions : tuple of (str, int, int, ParameterExpression)
        Matrix key, zero-based row and column, and the expression of each entry that is not a number.

    Examples
    --------
    >>> family = parse_plant_family_text('''
    ... [parameters.mass]
    ... nominal = 2.0
    ... low = 1.0
    ... high = 3.0
    ... [model]
    ... A = [[0.0, 1.0], [0.0, 0.0]]
    ... B = [[0.0], ["1 / mass"]]
    ... [[operating_points]]
    ... name = "heavy"
    ... values = { mass = 3.0 }
    ... ''')
    >>> family.nominal.B.ravel().tolist()
    [0.0, 0.5]
    >>> [(model.name, round(float(model.plant.B[1, 0]), 6)) for model in family.models()]
    [('nominal', 0.5), ('heavy', 0.333333)]
    """

    nominal: Plant
    parameters: tuple[Parameter, ...] = ()
    operating_points: tuple[OperatingPoint, ...] = ()
    expressions: tuple = ()
    disturbance_is_input: bool = True
    _models: tuple = field(default=(), repr=False)

    @property
    def parameter_names(self) -> tuple[str, ...]:
        return tuple(p.name for p in self.parameters)

    @property
    def nominal_values(self) -> dict:
        return {p.name: p.nominal for p in self.parameters}

    @property
    def varying_parameters(self) -> tuple[Parameter, ...]:
        """The parameters sampling moves."""
        return tuple(p for p in self.parameters if p.varies)

    def parameter(self, name: str) -> Parameter:
        for parameter in self.parameters:
            if parameter.name == name:
                return parameter
        raise PlantError(f"there is no parameter {name!r}; the parameters are {list(self.parameter_names)}")

    def models(self) -> tuple[FamilyModel, ...]:
        """The nominal model first, then one model per operating point, in file order."""
        return self._models

    def model(self, name: str) -> FamilyModel:
        """The model named ``name`` (``"nominal"`` or an operating point)."""
        for model in self._models:
            if model.name == name:
                return model
        names = [model.name for model in self._models]
        raise PlantError(f"there is no operating point {name!r}; this plant has {names}")

    def plant_at(self, values: dict, name: str | None = None) -> Plant:
        """The checked plant for parameter ``values`` (missing names take their nominal value).

        Raises
        ------
        PlantError
            Naming the entry and the values when an entry is not finite there.
        """
        full = self._full_values(values)
        matrices = {key: np.array(getattr(self.nominal, key), dtype=float) for key in EXPRESSION_MATRICES}
        for key, row, col, expression in self.expressions:
            value = float(expression.evaluate(full))
            if not math.isfinite(value):
                shown = ", ".join(f"{k} = {full[k]:g}" for k in sorted(expression.names))
                raise PlantError(f"{expression.where}: {expression.text!r} is not a finite number at {shown}"
                                 f"{f' (operating point {name!r})' if name else ''}; check the formula "
                                 "and the parameter's range")
            matrices[key][row, col] = value
        plant_name = self.nominal.name if name in (None, NOMINAL_NAME) else f"{self.nominal.name} — {name}"
        # a file without [disturbance] matrix means "the disturbance enters like the input": it follows B
        disturbance = None if self.disturbance_is_input else self.nominal.disturbance_matrix
        return replace(self.nominal, name=plant_name, disturbance_matrix=disturbance, **matrices)

    def _full_values(self, values: dict) -> dict:
        unknown = set(values) - set(self.parameter_names)
        if unknown:
            raise PlantError(f"unknown parameter(s) {sorted(unknown)}; the parameters are {list(self.parameter_names)}")
        full = self.nominal_values
        full.update({key: float(value) for key, value in values.items()})
        return full

    def matrix_stacks(self, values: dict) -> MatrixStacks:
        """A and B of many samples at once: one vectorised evaluation per expression.

        Parameters
        ----------
        values : dict
            Parameter name → array of shape (N,); missing names take their nominal value.

        Returns
        -------
        MatrixStacks
        """
        arrays = {key: np.asarray(v, dtype=float) for key, v in values.items()}
        count = len(next(iter(arrays.values()))) if arrays else 1
        full = {p.name: arrays.get(p.name, np.full(count, p.nominal)) for p in self.parameters}
        A = np.broadcast_to(self.nominal.A, (count, *self.nominal.A.shape)).copy()
        B = np.broadcast_to(self.nominal.B, (count, *self.nominal.B.shape)).copy()
        evaluable = np.ones(count, dtype=bool)
        bad_entry = [""] * count
        for key, row, col, expression in self.expressions:
            if key not in ("A", "B"):
                continue
            entry = np.broadcast_to(expression.evaluate(full), (count,))
            finite = np.isfinite(entry)
            for index in np.flatnonzero(~finite & evaluable):
                bad_entry[index] = expression.where
            evaluable &= finite
            (A if key == "A" else B)[:, row, col] = np.where(finite, entry, 0.0)
        return MatrixStacks(A=A, B=B, evaluable=evaluable, first_bad_entry=tuple(bad_entry))


# -- reading ------------------------------------------------------------------------------------


def _read_parameters(table) -> tuple[Parameter, ...]:
    if not isinstance(table, dict):
        raise PlantError("[parameters] must be a table of parameters, e.g. [parameters.mass] with nominal = 1.0")
    if len(table) > _MAX_PARAMETERS:
        raise PlantError(f"[parameters] defines {len(table)} parameters; at most {_MAX_PARAMETERS} are allowed")
    parameters = []
    for name, spec in table.items():
        where = f"[parameters.{name}]"
        if not name.isidentifier() or name.startswith("__"):
            raise PlantError(f"{where}: a parameter name must be a plain identifier (letters, digits, _) "
                             "not starting with __")
        if name in ("pi", "sqrt", "exp", "log", "sin", "cos", "tan"):
            raise PlantError(f"{where}: {name!r} is a built-in name of expressions; choose another name")
        if not isinstance(spec, dict):
            raise PlantError(f"{where} must be a table with at least nominal = <number>, got {spec!r}")
        unknown = set(spec) - _PARAMETER_KEYS
        if unknown:
            raise PlantError(f"{where} has unknown key(s) {sorted(unknown)}; allowed keys are {sorted(_PARAMETER_KEYS)}")
        if "nominal" not in spec:
            raise PlantError(f"{where} must give nominal = <number>")
        nominal = _finite_number(spec["nominal"], f"{where} nominal")
        low = None if "low" not in spec else _finite_number(spec["low"], f"{where} low")
        high = None if "high" not in spec else _finite_number(spec["high"], f"{where} high")
        std = None if "std" not in spec else _finite_number(spec["std"], f"{where} std")
        if std is None and (low is None) != (high is None):
            raise PlantError(f"{where}: a uniform range needs both low and high (or give std for a normal spread)")
        if low is not None and high is not None and low > high:
            raise PlantError(f"{where}: low = {low:g} is above high = {high:g}; swap them")
        if std is not None and std < 0:
            raise PlantError(f"{where}: std = {std:g} is negative; a standard deviation is ≥ 0")
        if (low is not None and nominal < low) or (high is not None and nominal > high):
            raise PlantError(f"{where}: nominal = {nominal:g} lies outside its range "
                             f"[{low if low is not None else '-inf'}, {high if high is not None else 'inf'}]")
        for key in ("unit", "description"):
            if key in spec and not isinstance(spec[key], str):
                raise PlantError(f"{where} {key} must be a string, got {spec[key]!r}")
        parameters.append(Parameter(name, nominal, low, high, std, spec.get("unit", ""), spec.get("description", "")))
    return tuple(parameters)


def _read_operating_points(points, parameters) -> tuple[OperatingPoint, ...]:
    if not isinstance(points, list) or not all(isinstance(p, dict) for p in points):
        raise PlantError("operating_points must be an array of tables: [[operating_points]] with name and values")
    if len(points) > _MAX_OPERATING_POINTS:
        raise PlantError(f"{len(points)} operating points given; at most {_MAX_OPERATING_POINTS} are allowed")
    names = {p.name for p in parameters}
    result, seen = [], set()
    for number, point in enumerate(points, start=1):
        where = f"operating point {number}"
        unknown = set(point) - _POINT_KEYS
        if unknown:
            raise PlantError(f"{where} has unknown key(s) {sorted(unknown)}; allowed keys are {sorted(_POINT_KEYS)}")
        name = point.get("name")
        if not isinstance(name, str) or not name.strip():
            raise PlantError(f"{where} must have a name (a non-empty string)")
        where = f"operating point {name!r}"
        if name == NOMINAL_NAME:
            raise PlantError(f"{where}: the name {NOMINAL_NAME!r} is kept for the nominal model; choose another")
        if name in seen:
            raise PlantError(f"{where} appears twice; every operating point needs its own name")
        seen.add(name)
        values = point.get("values", {})
        if not isinstance(values, dict):
            raise PlantError(f"{where}: values must be a table such as {{ mass = 1.2 }}, got {values!r}")
        missing = set(values) - names
        if missing:
            raise PlantError(f"{where} sets unknown parameter(s) {sorted(missing)}; the parameters are {sorted(names)}")
        checked = {key: _finite_number(value, f"{where} value of {key}") for key, value in values.items()}
        description = point.get("description", "")
        if not isinstance(description, str):
            raise PlantError(f"{where} description must be a string")
        result.append(OperatingPoint(name, checked, description))
    return tuple(result)


def _split_model(model: dict, parameters) -> tuple[dict, list]:
    """The [model] table with every expression replaced by its nominal value, and the expressions."""
    names = [p.name for p in parameters]
    nominal = {p.name: p.nominal for p in parameters}
    numeric = dict(model)
    expressions = []
    for key in EXPRESSION_MATRICES:
        rows = model.get(key)
        if not isinstance(rows, list):
            continue
        new_rows = []
        for i, row in enumerate(rows):
            if not isinstance(row, list):
                new_rows.append(row)  # the plant's own check explains a malformed row
                continue
            new_row = []
            for j, entry in enumerate(row):
                if isinstance(entry, str):
                    where = f"[model] {key} row {i + 1}, column {j + 1}"
                    expression = parse_expression(entry, names, where)
                    value = float(expression.evaluate(nominal))
                    if not math.isfinite(value):
                        shown = ", ".join(f"{k} = {nominal[k]:g}" for k in sorted(expression.names)) or "no parameters"
                        raise PlantError(f"{where}: {entry!r} is not a finite number at the nominal values ({shown})")
                    expressions.append((key, i, j, expression))
                    entry = value
                new_row.append(entry)
            new_rows.append(new_row)
        numeric[key] = new_rows
    return numeric, expressions


def is_family_mapping(data: dict) -> bool:
    """Whether parsed plant-file data describes a family (it has parameters or operating points).

    Without a ``[parameters]`` table a string in a matrix stays what it always was: an error
    of the single-model reader ("A contains 'a', which is not a real number").
    """
    return isinstance(data, dict) and ("parameters" in data or "operating_points" in data)


def plant_family_from_mapping(data: dict, source: str = "plant file") -> PlantFamily:
    """Build a :class:`PlantFamily` from parsed plant-file data (a plain plant file is a family of one).

    Raises
    ------
    PlantError
        Prefixed by ``source``, naming the parameter, operating point or matrix entry at fault.
    """
    from ._plant_file import plant_from_mapping  # the single-model reader; imported here to avoid a cycle

    if not isinstance(data, dict):
        raise PlantError(f"{source}: a plant file must be a TOML document")
    try:
        parameters = _read_parameters(data.get("parameters", {}))
        points = _read_operating_points(data.get("operating_points", []), parameters)
        model = data.get("model")
        numeric_model, expressions = _split_model(model, parameters) if isinstance(model, dict) else (model, [])
    except PlantError as error:
        raise PlantError(f"{source}: {error}") from None
    single = {key: value for key, value in data.items() if key not in ("parameters", "operating_points")}
    if model is not None:
        single["model"] = numeric_model
    nominal = plant_from_mapping(single, source)
    disturbance = data.get("disturbance")
    family = PlantFamily(nominal=nominal, parameters=parameters, operating_points=points,
                         expressions=tuple(expressions),
                         disturbance_is_input=not (isinstance(disturbance, dict) and "matrix" in disturbance))
    try:
        models = [FamilyModel(NOMINAL_NAME, family.nominal_values, nominal)]
        for point in points:
            values = family._full_values(point.values)
            models.append(FamilyModel(point.name, values, family.plant_at(point.values, point.name)))
    except PlantError as error:
        raise PlantError(f"{source}: {error}") from None
    object.__setattr__(family, "_models", tuple(models))
    return family


def parse_plant_family_text(text: str, source: str = "plant file") -> PlantFamily:
    """Parse the TOML text of a plant file into a :class:`PlantFamily`."""
    from ._plant_file import toml_document

    return plant_family_from_mapping(toml_document(text, source), source)


def load_plant_family_file(path) -> PlantFamily:
    """Read a plant file with its parameters and operating points.

    Parameters
    ----------
    path : str or pathlib.Path

    Returns
    -------
    PlantFamily
        For a file without ``[parameters]`` or ``[[operating_points]]``: the plant alone.
    """
    from ._plant_file import read_plant_file_text

    path = Path(path)
    return parse_plant_family_text(read_plant_file_text(path), path.name)
