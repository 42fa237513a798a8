"""Request validation: marshmallow schemas that turn a parsed JSON body into options.

Numbers are strict: a JSON string or boolean is never taken for a number, and
NaN or Infinity (which some JSON writers emit) are refused with a pointer to the
element. Defaults and limits come from :mod:`lagsight.options`.
"""
from __future__ import annotations

import math

import numpy as np
from marshmallow import (
    RAISE,
    Schema,
    ValidationError,
    fields,
    validate,
    validates_schema,
)
from marshmallow import missing as missing_value

from lagsight import options
from lagsight.problems import did_you_mean

_NUMBER_TYPES = (int, float)
_MAX_LISTED_ERRORS = 10


def _is_number(value) -> bool:
    return isinstance(value, _NUMBER_TYPES) and not isinstance(value, bool)


class StrictInteger(fields.Integer):
    """An integer given as a JSON integer (or an integral float such as 12.0), never a string or boolean."""

    def _deserialize(self, value, attr, data, **kwargs):
        if not _is_number(value):
            raise ValidationError("Must be an integer.")
        if isinstance(value, float) and not (math.isfinite(value) and value.is_integer()):
            raise ValidationError("Must be an integer.")
        return int(value)


class StrictFloat(fields.Float):
    """A finite JSON number, never a string or boolean."""

    def _deserialize(self, value, attr, data, **kwargs):
        if not _is_number(value):
            raise ValidationError("Must be a number.")
        try:
            number = float(value)
        except OverflowError:
            raise ValidationError("Must be a finite number.") from None
        if not math.isfinite(number):
            raise ValidationError("Must be a finite number.")
        return number


class NumberArray(fields.Field):
    """A JSON array of numbers and nulls, loaded as a float64 array with NaN for null.

    The type check runs over the whole list at C speed; only when it fails is the
    list scanned again to point at the first offending elements.
    """

    default_error_messages = {"type": "Must be an array of numbers (null marks a missing value)."}

    def _deserialize(self, value, attr, data, **kwargs):
        if not isinstance(value, list):
            raise self.make_error("type")
        kinds = set(map(type, value))
        if not kinds <= {int, float, type(None)}:
            raise ValidationError(self._element_errors(value))
        try:
            if type(None) in kinds:
                array = np.array([np.nan if v is None else v for v in value], dtype=np.float64)
            else:
                array = np.array(value, dtype=np.float64)
        except OverflowError:
            raise ValidationError(self._element_errors(value)) from None
        if type(None) not in kinds:  # no null sent: every value must be finite (one check)
            if not np.isfinite(array).all():
                raise ValidationError(self._element_errors(value))
            return array
        missing = np.isnan(array)
        if not np.isfinite(array[~missing]).all():
            raise ValidationError(self._element_errors(value))
        return array

    @staticmethod
    def _element_errors(value) -> dict:
        errors = {}
        for i, v in enumerate(value):
            if v is None:
                continue
            if not _is_number(v):
                errors[i] = [f"Must be a number or null, got {type(v).__name__ if not isinstance(v, bool) else 'boolean'}."]
            else:
                try:
                    ok = math.isfinite(float(v))
                except OverflowError:
                    ok = False
                if not ok:
                    errors[i] = ["Must be a finite number (NaN and Infinity are not allowed; send null for a missing value)."]
            if len(errors) >= _MAX_LISTED_ERRORS:
                break
        return errors


class BoxCoxLambda(fields.Field):
    """A Box-Cox lambda: a finite number, or "estimate" for the maximum-likelihood value."""

    def _deserialize(self, value, attr, data, **kwargs):
        if value == options.BOX_COX_ESTIMATE:
            return value
        if _is_number(value) and math.isfinite(float(value)) and abs(float(value)) <= options.MAX_BOX_COX_LAMBDA:
            return float(value)
        raise ValidationError(f'Must be a number between -{options.MAX_BOX_COX_LAMBDA:g} and '
                              f'{options.MAX_BOX_COX_LAMBDA:g}, or "{options.BOX_COX_ESTIMATE}".')


class Choice(validate.OneOf):
    """``OneOf`` whose message adds the nearest allowed value (``Did you mean 'bartlett'?``)."""

    def __call__(self, value):
        try:
            return super().__call__(value)
        except ValidationError as err:
            raise ValidationError(f"{err.messages[0]}{did_you_mean(value, self.choices)}") from None


class Suggesting(Schema):
    """A schema whose unknown fields are answered with the nearest field's name."""

    def handle_error(self, error: ValidationError, data, *, many: bool, **kwargs):
        if isinstance(error.messages, dict):
            unknown = self.error_messages["unknown"]
            for key, messages in error.messages.items():
                if key not in self.fields and messages == [unknown]:
                    error.messages[key] = [unknown + did_you_mean(key, self.load_fields)]


class StrictBoolean(fields.Boolean):
    """A JSON true or false, nothing else."""

    def _deserialize(self, value, attr, data, **kwargs):
        if not isinstance(value, bool):
            raise ValidationError("Must be true or false.")
        return value


class TransformFields(Suggesting):
    """The ``transform`` object: steps applied in the order of options.TRANSFORM_ORDER."""

    class Meta:
        unknown = RAISE

    log = StrictBoolean(load_default=False)
    box_cox = BoxCoxLambda(load_default=None, allow_none=True)
    difference = StrictInteger(load_default=0, validate=validate.Range(min=0, max=options.MAX_DIFFERENCE))
    seasonal_difference = StrictInteger(load_default=0, validate=validate.Range(min=0, max=options.MAX_SEASONAL_DIFFERENCE))
    detrend = fields.String(load_default=None, allow_none=True, validate=Choice(options.DETREND_KINDS))


MAX_STAMP_LENGTH = 64


class StampList(fields.List):
    """``fields.List(fields.String(1 to 64 characters))`` that takes a list of such strings in one
    pass; anything else goes through the List's own item by item load, for its usual errors (a
    batch of series with 120 stamps each spent about 0.3 ms per series in that load)."""

    def __init__(self, **kwargs):
        super().__init__(fields.String(validate=validate.Length(min=1, max=MAX_STAMP_LENGTH)), **kwargs)

    def _deserialize(self, value, attr, data, **kwargs):
        if type(value) is list and all(type(s) is str and 0 < len(s) <= MAX_STAMP_LENGTH for s in value):
            return list(value)
        return super()._deserialize(value, attr, data, **kwargs)


def stamps_match_values(data: dict) -> bool:
    """The one schema-level rule of a series: as many timestamps as values (when both are there)."""
    stamps, values = data.get("timestamps"), data.get("values")
    return stamps is None or values is None or len(stamps) == len(values)


class SeriesFields(Suggesting):
    """The fields that describe one series (shared by the single and batch requests)."""

    class Meta:
        unknown = RAISE

    values = NumberArray(required=True)
    timestamps = StampList(load_default=None)
    period = StrictInteger(load_default=None, allow_none=True, validate=validate.Range(min=options.MIN_PERIOD))
    name = fields.String(load_default=None, allow_none=True, validate=validate.Length(max=200))
    missing = fields.String(load_default=options.DEFAULT_MISSING, validate=Choice(options.MISSING_METHODS))
    transform = fields.Nested(TransformFields, load_default=None, allow_none=True)

    @validates_schema
    def _timestamps_match(self, data, **kwargs):
        if not stamps_match_values(data):
            stamps, values = data["timestamps"], data["values"]
            raise ValidationError(
                f"Must have the same length as values ({len(values)}), got {len(stamps)}.", "timestamps"
            )


class AnalysisOptions(Suggesting):
    """Options that shape the analysis."""

    class Meta:
        unknown = RAISE

    max_lag = StrictInteger(load_default=None, allow_none=True, validate=validate.Range(min=1))
    confidence = StrictFloat(
        load_default=options.DEFAULT_CONFIDENCE,
        validate=validate.Range(min=0, max=1, min_inclusive=False, max_inclusive=False),
    )
    model_df = StrictInteger(load_default=options.DEFAULT_MODEL_DF, validate=validate.Range(min=0))
    horizon = StrictInteger(load_default=options.DEFAULT_HORIZON, validate=validate.Range(min=options.MIN_HORIZON))
    band = fields.String(load_default=options.DEFAULT_BAND, validate=Choice(options.BAND_KINDS))
    tests = fields.List(
        fields.String(validate=Choice(options.TEST_NAMES)),
        load_default=None, allow_none=True, validate=validate.Length(min=1),
    )
    p_values = fields.String(load_default=options.DEFAULT_P_VALUES, validate=Choice(options.P_VALUE_METHODS))
    replicates = StrictInteger(load_default=options.DEFAULT_REPLICATES, validate=validate.Range(min=options.MIN_REPLICATES))
    seed = StrictInteger(load_default=None, allow_none=True, validate=validate.Range(min=0, max=2**63 - 1))

    @validates_schema
    def _unique_tests(self, data, **kwargs):
        tests = data.get("tests")
        if tests and len(set(tests)) != len(tests):
            raise ValidationError("Each test may be named once.", "tests")


class AnswerOptions(Suggesting):
    """Options that shape what is written, not what is computed: detail, digits and charts."""

    class Meta:
        unknown = RAISE

    detail = fields.String(load_default=options.DEFAULT_DETAIL, validate=Choice(options.DETAIL_LEVELS))
    digits = StrictInteger(load_default=options.DEFAULT_DIGITS, allow_none=True,
                           validate=validate.Range(min=options.MIN_DIGITS, max=options.MAX_DIGITS))
    charts = StrictBoolean(load_default=options.DEFAULT_CHARTS)


class DiagnosticsRequest(SeriesFields, AnalysisOptions, AnswerOptions):
    """Body of POST /v1/diagnostics."""


class DirectLoad:
    """``schema.load(body)`` for the common body of plain fields, without marshmallow's per-load overhead.

    A schema load visits every declared field and runs the schema's hooks whatever the body
    holds, which costs more than validating a 120-point series itself. A body whose keys are
    all in ``keys`` and that holds every required field is loaded field by field with the same
    fields, so the same conversions and validators, and the same defaults; ``checks`` are the
    schema-level rules those keys take part in, as functions of the loaded fields that say whether
    the rule holds. Any other body, any body a field refuses and any that fails a check goes
    through the schema's own load, which gives the usual error messages. tests/test_api.py and
    tests/test_batch.py check that both agree.
    """

    def __init__(self, schema: Schema, keys, checks=()):
        self.schema = schema
        self.checks = tuple(checks)
        self.fields = schema.fields
        self.keys = frozenset(keys)
        unknown = self.keys - set(self.fields)
        if unknown:
            raise ValueError(f"not fields of {type(schema).__name__}: {sorted(unknown)}")
        self.required = frozenset(name for name, f in self.fields.items() if f.required)
        self.defaults = {name: f.load_default for name, f in self.fields.items()
                         if f.load_default is not missing_value}
        if any(callable(v) for v in self.defaults.values()):
            raise ValueError("callable load_default values are not supported by DirectLoad")

    def load(self, body: dict) -> dict:
        if body.keys() <= self.keys and self.required <= body.keys():
            data = dict(self.defaults)
            try:
                for key, value in body.items():
                    data[key] = self.fields[key].deserialize(value, key, body)
                if all(check(data) for check in self.checks):
                    return data
            except ValidationError:
                pass
        return self.schema.load(body)


#: Fields of the single request loaded directly, timestamps with the check they share with values (DIRECT_CHECKS).
DIRECT_FIELDS = ("values", "timestamps", "period", "name", "missing", "transform", "max_lag", "confidence",
                 "model_df", "horizon", "band", "p_values", "replicates", "seed", "detail", "digits", "charts")
DIRECT_CHECKS = (stamps_match_values,)


class SeriesId(fields.Field):
    """A caller's key for one series of a batch: a JSON string (1 to 200 characters) or integer."""

    default_error_messages = {"type": "Must be a string of 1 to 200 characters or an integer between "
                                      "-9223372036854775808 and 9223372036854775807."}

    def _deserialize(self, value, attr, data, **kwargs):
        if isinstance(value, str) and 1 <= len(value) <= options.MAX_ID_LENGTH:
            return value
        if isinstance(value, int) and not isinstance(value, bool) and -(2**63) <= value < 2**63:
            return value  # the range JSON writers (orjson included) carry exactly
        raise self.make_error("type")


class ItemList(fields.Field):
    """A JSON array whose items are checked elsewhere, loaded as is (``fields.List(fields.Raw())`` without
    visiting every item: tens of thousands of batch items are each validated on their own)."""

    default_error_messages = {"invalid": "Not a valid list."}

    def _deserialize(self, value, attr, data, **kwargs):
        if not isinstance(value, list):
            raise self.make_error("invalid")
        return value


class BatchSeries(SeriesFields):
    """One item of ``series`` in POST /v1/diagnostics/batch.

    ``period``, ``missing``, ``transform``, ``max_lag``, ``confidence``, ``model_df`` and ``horizon``
    here override the batch's shared values for this series only; absent, the shared
    value applies (``max_lag: null`` asks for the default rule for this series).
    """

    id = SeriesId(required=True)
    period = StrictInteger(allow_none=True, validate=validate.Range(min=options.MIN_PERIOD))
    max_lag = StrictInteger(allow_none=True, validate=validate.Range(min=1))
    confidence = StrictFloat(validate=validate.Range(min=0, max=1, min_inclusive=False, max_inclusive=False))
    model_df = StrictInteger(validate=validate.Range(min=0))
    horizon = StrictInteger(validate=validate.Range(min=options.MIN_HORIZON))
    missing = fields.String(validate=Choice(options.MISSING_METHODS))
    transform = fields.Nested(TransformFields, allow_none=True)


class BatchRequest(AnalysisOptions, AnswerOptions):
    """Body of POST /v1/diagnostics/batch: the series (checked one by one) and the shared options.

    ``series`` is only checked to be a non-empty array here; each item is validated
    on its own so that one bad series yields an error for that item alone.
    """

    series = ItemList(required=True, validate=validate.Length(min=1))
    period = StrictInteger(load_default=None, allow_none=True, validate=validate.Range(min=options.MIN_PERIOD))
    missing = SeriesFields._declared_fields["missing"]
    transform = SeriesFields._declared_fields["transform"]

#: The options a series of a batch may override, and the shared field each falls back to.
BATCH_OVERRIDES = ("period", "missing", "transform", "max_lag", "confidence", "model_df", "horizon")
#: Of those, the ones that describe the series (read by series.prepare from the series' fields).
SERIES_OVERRIDES = ("period", "missing", "transform")
