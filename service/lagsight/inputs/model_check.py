"""The body of POST /v1/model-check: a series with the diagnosis options, and the model to fit.

``order`` is ``[p, d, q]`` or ``"suggested"``; with an explicit order, ``seasonal_order``
``[P, D, Q, s]`` and ``trend`` may be given. ``model_df`` is not an option here: the residuals'
degrees of freedom come from the fitted model's AR and MA terms.
"""
from __future__ import annotations

from marshmallow import ValidationError, fields, validate, validates_schema

from lagsight import options
from lagsight.inputs.schema import AnalysisOptions, SeriesFields

_P, _D, _Q = options.MODEL_MAX_ORDER
_SP, _SD, _SQ = options.MODEL_MAX_SEASONAL_ORDER


def _integers(value, names: tuple[str, ...], tops: tuple[int | None, ...], bottoms: tuple[int, ...]) -> list[int]:
    """A JSON array of len(names) integers within their bounds, or a ValidationError keyed by position."""
    if not isinstance(value, list) or len(value) != len(names):
        raise ValidationError(f"Must be an array of {len(names)} integers [{', '.join(names)}].")
    errors, out = {}, []
    for i, (v, name, top, bottom) in enumerate(zip(value, names, tops, bottoms)):
        integral = isinstance(v, (int, float)) and not isinstance(v, bool) and float(v).is_integer()
        if not integral or v < bottom or (top is not None and v > top):
            bound = f"between {bottom} and {top}" if top is not None else f"at least {bottom}"
            errors[i] = [f"{name} must be an integer {bound}."]
        else:
            out.append(int(v))
    if errors:
        raise ValidationError(errors)
    return out


class ModelOrder(fields.Field):
    """``[p, d, q]`` or ``"suggested"``."""

    def _deserialize(self, value, attr, data, **kwargs):
        if value == options.MODEL_SUGGESTED:
            return value
        if not isinstance(value, list):
            raise ValidationError(f'Must be [p, d, q] or "{options.MODEL_SUGGESTED}".')
        return _integers(value, ("p", "d", "q"), (_P, _D, _Q), (0, 0, 0))


class SeasonalOrder(fields.Field):
    """``[P, D, Q, s]`` with s the seasonal period."""

    def _deserialize(self, value, attr, data, **kwargs):
        return _integers(value, ("P", "D", "Q", "s"), (_SP, _SD, _SQ, None), (0, 0, 0, options.MIN_PERIOD))


class ModelCheckRequest(SeriesFields, AnalysisOptions):
    """Body of POST /v1/model-check."""

    class Meta:
        exclude = ("model_df", "horizon")  # the residuals of a fitted model are one-step errors

    order = ModelOrder(required=True)
    seasonal_order = SeasonalOrder(load_default=None, allow_none=True)
    trend = fields.String(load_default=None, allow_none=True, validate=validate.OneOf(options.MODEL_TRENDS))

    @validates_schema
    def _model(self, data, **kwargs):
        order, seasonal = data.get("order"), data.get("seasonal_order")
        if order == options.MODEL_SUGGESTED:
            for key in ("seasonal_order", "trend"):
                if data.get(key) is not None:
                    raise ValidationError(f'Only with an explicit order: "{options.MODEL_SUGGESTED}" chooses it.', key)
            return
        if order is None or seasonal is None:
            return
        P, _, Q, s = seasonal
        if P and order[0] >= s:
            raise ValidationError(f"p ({order[0]}) must be less than the seasonal period s ({s}) when P > 0: "
                                  "the AR lags would repeat the seasonal ones.", "order")
        if Q and order[2] >= s:
            raise ValidationError(f"q ({order[2]}) must be less than the seasonal period s ({s}) when Q > 0: "
                                  "the MA lags would repeat the seasonal ones.", "order")
