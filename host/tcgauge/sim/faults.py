"""Fault injection: named faults of a channel's tube, wiring and electronics.

A fault is applied to a channel (any object with `.tc` a SimAdc, `.heater`
a SimCurrentSource and `.cj` a SimColdJunction) and cleared again; the Bench
schedules both at chosen simulated times (`Bench.inject`, `Scenario.fault`).
Each fault only sets flags on the devices; electronics.py holds the model
of what a flagged device returns. Models (stated; invented numbers marked):

- heater-open: the filament has burnt through: no current flows, read_v()
  sits at the compliance voltage, the filament cools to the wall.
- heater-short: a short (`ohm`, default 0.05, invented) across the heater
  pins: the source reaches its current, almost none flows in the filament,
  read_v() is near 0.
- tc-open: the thermocouple circuit is open; the front end's bias resistors
  pull the floating input to the rail, so the ADC clips at +full scale.
- tc-short: the thermocouple leads are shorted at the feedthrough: 0 uV at
  the ADC input (plus the ADC's own offset and noise), whatever the heating.
- adc-stuck: the ADC returns the same code forever (its last code).
- adc-saturated: the ADC returns its +full-scale code.
- adc-fail: the ADC does not respond: read_uv() raises OSError("adc: no response").
- cj-fail: the cold-junction sensor raises OSError("cold junction: sensor not responding").
- cj-absurd: the cold-junction sensor returns `value_c` (default 999.0, invented).
- intermittent: a bad thermocouple contact: each conversion sees an open
  input with `probability` (default 0.3, invented), drawn from the ADC's own
  generator (deterministic per seed).
- supply-sag: the source's supply falls to `supply_v` (default 3.0 V,
  invented), lowering the compliance voltage.
"""

import inspect


def _heater_open(ch):
    ch.heater.load_open = True


def _heater_open_clear(ch):
    ch.heater.load_open = False


def _heater_short(ch, ohm=0.05):
    if not ohm > 0.0:
        raise ValueError("fault heater-short: ohm must be > 0, not %r" % (ohm,))
    ch.heater.load_short_ohm = float(ohm)


def _heater_short_clear(ch):
    ch.heater.load_short_ohm = None


def _tc_open(ch):
    ch.tc.input_open = True


def _tc_open_clear(ch):
    ch.tc.input_open = False


def _tc_short(ch):
    ch.tc.input_shorted = True


def _tc_short_clear(ch):
    ch.tc.input_shorted = False


def _adc_stuck(ch):
    ch.tc.stuck = True


def _adc_stuck_clear(ch):
    ch.tc.stuck = False


def _adc_saturated(ch):
    ch.tc.saturated = True


def _adc_saturated_clear(ch):
    ch.tc.saturated = False


def _adc_fail(ch):
    ch.tc.no_response = True


def _adc_fail_clear(ch):
    ch.tc.no_response = False


def _cj_fail(ch):
    ch.cj.no_response = True


def _cj_fail_clear(ch):
    ch.cj.no_response = False


def _cj_absurd(ch, value_c=999.0):
    ch.cj.absurd_c = float(value_c)


def _cj_absurd_clear(ch):
    ch.cj.absurd_c = None


def _intermittent(ch, probability=0.3):
    if not 0.0 < probability <= 1.0:
        raise ValueError("fault intermittent: probability must be in (0, 1], not %r" % (probability,))
    ch.tc.dropout_probability = float(probability)


def _intermittent_clear(ch):
    ch.tc.dropout_probability = 0.0


def _supply_sag(ch, supply_v=3.0):
    if not supply_v >= 0.0:
        raise ValueError("fault supply-sag: supply_v must be >= 0, not %r" % (supply_v,))
    if not hasattr(ch.heater, "_healthy_supply_v"):
        ch.heater._healthy_supply_v = ch.heater.supply_v
    ch.heater.supply_v = float(supply_v)


def _supply_sag_clear(ch):
    if hasattr(ch.heater, "_healthy_supply_v"):
        ch.heater.supply_v = ch.heater._healthy_supply_v
        del ch.heater._healthy_supply_v


# name -> (apply(channel, **params), clear(channel))
FAULTS = {
    "heater-open": (_heater_open, _heater_open_clear),
    "heater-short": (_heater_short, _heater_short_clear),
    "tc-open": (_tc_open, _tc_open_clear),
    "tc-short": (_tc_short, _tc_short_clear),
    "adc-stuck": (_adc_stuck, _adc_stuck_clear),
    "adc-saturated": (_adc_saturated, _adc_saturated_clear),
    "adc-fail": (_adc_fail, _adc_fail_clear),
    "cj-fail": (_cj_fail, _cj_fail_clear),
    "cj-absurd": (_cj_absurd, _cj_absurd_clear),
    "intermittent": (_intermittent, _intermittent_clear),
    "supply-sag": (_supply_sag, _supply_sag_clear),
}


def check_name(name):
    """Return `name` if it is a known fault, else raise ValueError naming the choices."""
    if name not in FAULTS:
        raise ValueError("unknown fault %r (known: %s)" % (name, ", ".join(sorted(FAULTS))))
    return name


def apply(channel, name, **params):
    """Inject fault `name` into `channel` now."""
    check_params(name, params)
    FAULTS[name][0](channel, **params)


def check_params(name, params):
    """Raise ValueError unless fault `name` accepts the keyword `params`."""
    fn = FAULTS[check_name(name)][0]
    try:
        inspect.signature(fn).bind(None, **params)
    except TypeError:
        raise ValueError("fault %s: unexpected parameters %s" % (name, ", ".join(sorted(params))))


def clear(channel, name):
    """Remove fault `name` from `channel` now."""
    FAULTS[check_name(name)][1](channel)
