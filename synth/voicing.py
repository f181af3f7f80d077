"""A patch voiced for one note: retuned to the note's pitch, scaled by velocity.

Used by MIDI rendering and batch rendering, so a note sounds the same in both.

Velocity curve
--------------
The patch as written is the note played at :data:`REFERENCE_VELOCITY` (100).
A MIDI velocity v (1..127) is read as proportional to the striking speed, so

* ``strength(v) = strength * v / 100`` -- the excitation (a velocity impulse
  or a pluck deflection) grows linearly with the speed: 127 to 1 spans 42 dB;
* ``contact_time(v) = contact_time * (100 / v) ** CONTACT_EXPONENT`` -- a
  harder blow makes a shorter contact and so a brighter sound.  For a contact
  spring with force law F = K x^p the contact time of a mass hitting it scales
  as v^(-(p - 1) / (p + 1)); felt hammers have p = 2.2-3.5 (Hall & Askenfelt
  1988, via Rossing), and p = 2.5 gives the exponent 3/7 = 0.43 used here.
* a strike with a mallet (``excitation.mallet``) strikes at ``speed * v / 100``
  and its contact time is the mallet's own Hertz contact time at that speed
  (:func:`synth.excitation.hertz_contact_time`: v^(-1/5) for p = 3/2, v^(-3/7)
  for felt's p = 2.5), so the brightness follows the mallet's contact law.
"""
from __future__ import annotations

from dataclasses import replace

from .units import A4_HZ, midi_to_hz

__all__ = ["REFERENCE_VELOCITY", "CONTACT_EXPONENT", "velocity_strength", "velocity_contact_time", "voice_patch"]

REFERENCE_VELOCITY = 100  # MIDI velocity at which the patch sounds as written
CONTACT_EXPONENT = (2.5 - 1.0) / (2.5 + 1.0)  # dimensionless, felt hammer with p = 2.5


def velocity_strength(strength, velocity):
    """Excitation strength at MIDI `velocity` (1..127): linear in velocity."""
    return strength * float(velocity) / REFERENCE_VELOCITY


def velocity_contact_time(contact_time, velocity):
    """Strike contact time (s) at MIDI `velocity`: shorter for harder blows."""
    return contact_time * (REFERENCE_VELOCITY / float(velocity)) ** CONTACT_EXPONENT


def voice_patch(patch, *, midi_note=None, pitch_hz=None, velocity=REFERENCE_VELOCITY, a4_hz=None, detune_cents=0.0,
                cache=None):
    """`patch` retuned to a note and scaled for a velocity.

    Parameters
    ----------
    patch : Patch or Instrument
        An instrument (:class:`synth.instrument.Instrument`) gives the patch
        of key `midi_note` as designed (its own tuning; `a4_hz`, when not
        None, moves it); a patch is retuned to the note.
    midi_note : float or None
        12-TET note number (69 = A4 at `a4_hz`); or give `pitch_hz`.
    pitch_hz : float or None, Hz
    velocity : int, 1..127
    a4_hz : float or None, Hz
        Tuning reference (None: 440 Hz for a patch, the instrument's own).
    detune_cents : float, cents
        Added to the pitch (the object is retuned to it; to move the
        partials of the object as solved for the note instead, pass the
        detune to :func:`synth.pipeline.partial_table`).
    cache : SolveCache or None
        Where the retune is computed (default: the process-wide cache).

    Returns
    -------
    Patch

    Raises
    ------
    PatchError
        If the object cannot reach the pitch (names ``resonator.pitch``).
    """
    from .patch import retune

    if not 1 <= velocity <= 127:
        raise ValueError(f"velocity={velocity!r} must be in 1..127")
    key_patch = getattr(patch, "key_patch", None)
    if key_patch is not None:  # an instrument: the key's own object, tuned as designed
        if midi_note is None:
            raise ValueError("an instrument is played by key: give midi_note")
        if detune_cents:
            raise ValueError("an instrument's key is tuned as designed: detune its partials (partial_table) instead")
        patch = key_patch(midi_note, a4_hz=a4_hz)
        pitch_hz = midi_note = None
    if pitch_hz is None and midi_note is not None:
        pitch_hz = float(midi_to_hz(midi_note, a4_hz=A4_HZ if a4_hz is None else a4_hz))
    if pitch_hz is not None:
        patch = retune(patch, pitch_hz * 2.0 ** (detune_cents / 1200.0), cache=cache)
    if velocity == REFERENCE_VELOCITY:  # as written, exactly (strength * 100 / 100 may round)
        return patch
    mallet = patch.excitation.mallet
    if mallet is not None:  # the mallet strikes faster or slower: its own contact law sets the time
        mallet = mallet.at_speed(mallet.speed * float(velocity) / REFERENCE_VELOCITY)
    excitation = replace(
        patch.excitation,
        strength=velocity_strength(patch.excitation.strength, velocity),
        contact_time=velocity_contact_time(patch.excitation.contact_time, velocity) if mallet is None
        else mallet.contact_time,
        mallet=mallet,
    )
    return replace(patch, excitation=excitation)
