"""Storage of ensemble chains: the checkpoint file, its fingerprint and resuming.

A chain (positions, log-probabilities, acceptance counts, start and the
sampler's random state) is written atomically to a compressed ``.npz``
(:data:`CHAIN_FILE` in an output folder) as a checkpoint while sampling and
at the end. Everything a chain depends on, except its length and the
analysis options, is hashed into a fingerprint stored beside it, so that a
chain is resumed only with the same data, model, bounds, priors, walkers,
seed and moves. Because the saved random state and walker positions are
exactly those of the interrupted run, a resumed chain is identical to an
uninterrupted one.

Arrays in the file
------------------
``chain`` [n_steps, n_walkers, n_dim], ``log_prob`` [n_steps, n_walkers],
``accepted`` [n_walkers], ``start`` [n_walkers, n_dim], ``start_log_prob``
[n_walkers], ``rng_keys`` and ``rng_numbers`` (the MT19937 state) and ``meta``
(JSON: labels, names, settings, fingerprint, format version, elapsed time,
evaluations, steps done).
"""

from __future__ import annotations

import hashlib
import io
import json
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from kinfit.core.atomic import write_bytes
from kinfit.core.errors import KinfitError

if TYPE_CHECKING:
    from kinfit.estimation.space import ParameterSpace

__all__ = ["ChainState", "CHAIN_FILE", "write_chain", "load_chain", "fingerprint",
           "check_resumable"]

CHAIN_FILE = "chain.npz"
_FORMAT_VERSION = 1


@dataclass(frozen=True)
class ChainState:
    """A chain in progress: everything a checkpoint holds.

    Attributes
    ----------
    chain : ndarray [n_done, n_walkers, n_dim]
        Walker positions after each step, on the inference scale.
    log_prob : ndarray [n_done, n_walkers]
    accepted : ndarray [n_walkers] of int
        Accepted proposals of each walker.
    start : ndarray [n_walkers, n_dim]
    start_log_prob : ndarray [n_walkers]
    random_state : tuple
        State of the sampler's ``numpy.random.RandomState`` after the last step.
    elapsed : float
        Wall time spent sampling, seconds (interrupted and resumed runs together).
    n_evaluations : int
        Parameter sets whose log-probability was computed.
    """

    chain: np.ndarray
    log_prob: np.ndarray
    accepted: np.ndarray
    start: np.ndarray
    start_log_prob: np.ndarray
    random_state: tuple[str, np.ndarray, int, int, float]
    elapsed: float = 0.0
    n_evaluations: int = 0

    @property
    def n_done(self):
        return self.chain.shape[0]


def fingerprint(space: ParameterSpace, walkers, seed, moves):
    """Hash of everything a chain depends on except its length and analysis options.

    Parameters
    ----------
    space : ParameterSpace
        What is sampled: the data, bounds, scales, priors and noise mode.
    walkers, seed, moves
        The sampler's settings that shape the chain.

    Returns
    -------
    str
        SHA-256 hex digest.
    """
    problem = space.problem
    obs = problem.observation
    h = hashlib.sha256()
    for arr in (obs.values, obs.sigma if obs.sigma is not None else np.zeros(0),
                obs.time_index, obs.species_index, *obs.run_times, space.lower, space.upper,
                space.base, space.log10.astype(float)):
        h.update(np.ascontiguousarray(arr, dtype=float).tobytes())
    h.update(json.dumps([space.labels, [p.to_dict() for p in space.priors], space.noise,
                         problem.system.stoichiometry.tolist(),
                         [str(d[1]) for d in problem.mechanism.directions],
                         walkers, seed, moves],
                        default=str).encode())
    return h.hexdigest()


def write_chain(path, state, meta):
    """Write a chain (a checkpoint or the final chain) atomically as compressed ``.npz``.

    Parameters
    ----------
    path : str or os.PathLike
    state : ChainState
    meta : dict
        JSON-able description: labels, names, settings, fingerprint, ...
    """
    name, keys, pos, has_gauss, cached = state.random_state
    buffer = io.BytesIO()
    np.savez_compressed(
        buffer, chain=state.chain, log_prob=state.log_prob, accepted=state.accepted,
        start=state.start, start_log_prob=state.start_log_prob,
        rng_keys=np.asarray(keys, dtype=np.uint32),
        rng_numbers=np.array([pos, has_gauss, cached], dtype=float),
        meta=np.array(json.dumps({**meta, "format": _FORMAT_VERSION, "rng": name,
                                  "elapsed": state.elapsed,
                                  "n_evaluations": state.n_evaluations,
                                  "n_done": state.n_done})))
    write_bytes(path, buffer.getvalue())


def load_chain(path):
    """Read a chain written by :func:`write_chain`.

    Returns
    -------
    (ChainState, meta dict)

    Raises
    ------
    KinfitError
        If the file is missing, not a kinfit chain, or damaged.
    """
    path = Path(path)
    try:
        with np.load(path, allow_pickle=False) as data:
            meta = json.loads(str(data["meta"]))
            pos, has_gauss, cached = data["rng_numbers"].tolist()
            state = ChainState(
                chain=data["chain"], log_prob=data["log_prob"], accepted=data["accepted"],
                start=data["start"], start_log_prob=data["start_log_prob"],
                random_state=(meta.get("rng", "MT19937"), data["rng_keys"], int(pos),
                              int(has_gauss), float(cached)),
                elapsed=float(meta.get("elapsed", 0.0)),
                n_evaluations=int(meta.get("n_evaluations", 0)))
    except FileNotFoundError:
        raise KinfitError(f"{path}: no such chain file") from None
    except (OSError, KeyError, ValueError, EOFError) as exc:
        raise KinfitError(f"{path}: not a kinfit chain file or damaged ({exc}); remove it and "
                          f"start again without --resume") from None
    if meta.get("format") != _FORMAT_VERSION:
        raise KinfitError(f"{path}: written by another version of kinfit's chain format")
    return state, meta


def check_resumable(path, meta, fingerprint, settings, names=None):
    """Refuse to resume a chain made with other settings, data or model.

    Parameters
    ----------
    path : str or os.PathLike
        The chain file (for the message).
    meta : dict
        Its metadata, from :func:`load_chain`.
    fingerprint : str
        The fingerprint of the run about to resume (see :func:`fingerprint`).
    settings : dict
        The run's settings (``walkers``, ``seed``, ``moves``, ``noise``, ...).
    names : sequence of str, optional
        The run's parameter names; when they differ from the chain's, the
        message names the difference (a chain written before fitted starting
        concentrations were named ``A_0_r1`` has ``A0_r1``).

    Raises
    ------
    KinfitError
        Naming the settings or parameters that changed.
    """
    if meta.get("fingerprint") == fingerprint:
        return
    old_names = meta.get("names")
    if names is not None and old_names is not None and list(old_names) != list(names):
        gone = [n for n in old_names if n not in names]
        new = [n for n in names if n not in old_names]
        renamed = [n for n in gone if "0_" in n and n.replace("0_", "_0_", 1) in new]
        note = (f"; kinfit now names fitted starting concentrations like "
                f"{renamed[0].replace('0_', '_0_', 1)} (was {renamed[0]})" if renamed else "")
        raise KinfitError(f"{path}: this chain's parameters differ from this run's (in the "
                          f"chain only: {', '.join(gone) or 'none'}; now only: "
                          f"{', '.join(new) or 'none'}{note}); start a new chain in another "
                          f"--out folder")
    old = meta.get("settings", {})
    changed = [f"{k} {old.get(k)!r} -> {settings.get(k)!r}"
               for k in ("walkers", "seed", "moves", "noise") if old.get(k) != settings.get(k)]
    what = "; ".join(changed) if changed else "the model, the data, bounds or priors differ"
    raise KinfitError(f"{path}: this chain was made with different settings ({what}); "
                      f"resume with the same experiment, model and options, or start a new "
                      f"chain in another --out folder")
