"""Filter checkpoints: ensemble, parameters, random state and time, to bytes and back.

Byte layout (Bloomline's own, version 1): the 8 bytes ``b"BLCKPT01"``, the
length of a UTF-8 JSON header as an unsigned 64-bit little-endian integer,
the header (time, names, ensemble shape, random-generator state), then the
ensemble as little-endian float64 in row-major order. Floats in the header
are written with ``repr`` (shortest round-trip form) and the generator state
as exact integers, so ``from_bytes(to_bytes(c))`` restores every bit and a
resumed run equals one that never stopped.
"""
from __future__ import annotations

import json
import struct
from dataclasses import dataclass, field

import numpy as np

MAGIC = b"BLCKPT01"


@dataclass(eq=False)
class Checkpoint:
    """The filter's memory between cycles.

    time_d [epoch days]; ensemble (M, n_aug) in physical units (state µg/L,
    then augmented parameters, see ``names``); names (n_aug,) one per column;
    rng_state: ``numpy.random.Generator.bit_generator.state`` of the
    generator the next cycle draws from.
    """

    time_d: float
    ensemble: np.ndarray
    names: tuple[str, ...]
    rng_state: dict = field(default_factory=dict)

    def __post_init__(self):
        self.ensemble = np.asarray(self.ensemble, dtype=float)
        self.names = tuple(str(n) for n in self.names)
        self.time_d = float(self.time_d)
        if self.ensemble.ndim != 2 or self.ensemble.shape[1] != len(self.names):
            raise ValueError(f"checkpoint ensemble must be (M, {len(self.names)}) to match names, "
                             f"got {self.ensemble.shape}")

    @property
    def members(self) -> int:
        return int(self.ensemble.shape[0])

    def rng(self) -> np.random.Generator:
        """A generator restored from ``rng_state`` (same bit generator type)."""
        name = self.rng_state["bit_generator"]
        bit_gen = getattr(np.random, name)()
        bit_gen.state = self.rng_state
        return np.random.Generator(bit_gen)

    def to_bytes(self) -> bytes:
        header = json.dumps({
            "time_d": self.time_d,
            "names": list(self.names),
            "shape": list(self.ensemble.shape),
            "rng_state": self.rng_state,
        }, sort_keys=True).encode("utf-8")
        body = np.ascontiguousarray(self.ensemble, dtype="<f8").tobytes()
        return MAGIC + struct.pack("<Q", len(header)) + header + body

    @classmethod
    def from_bytes(cls, data: bytes) -> Checkpoint:
        data = bytes(data)
        if data[:8] != MAGIC or len(data) < 16:
            raise ValueError("not a Bloomline checkpoint (bad magic bytes)")
        (n_header,) = struct.unpack("<Q", data[8:16])
        header = json.loads(data[16:16 + n_header].decode("utf-8"))
        shape = tuple(header["shape"])
        body = data[16 + n_header:]
        if len(body) != 8 * shape[0] * shape[1]:
            raise ValueError(f"checkpoint body has {len(body)} bytes, expected {8 * shape[0] * shape[1]}")
        ensemble = np.frombuffer(body, dtype="<f8").reshape(shape).astype(float)
        return cls(time_d=header["time_d"], ensemble=ensemble, names=tuple(header["names"]),
                   rng_state=header["rng_state"])

    def equals(self, other: Checkpoint) -> bool:
        """Bit-for-bit equality of time, names, ensemble and random state."""
        return (self.time_d == other.time_d and self.names == other.names
                and self.ensemble.shape == other.ensemble.shape
                and self.ensemble.tobytes() == other.ensemble.tobytes()
                and self.rng_state == other.rng_state)
