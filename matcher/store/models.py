"""The house-library tables (SQLAlchemy 2 ORM, typed ``Mapped[...]`` models).

=================  ===========================================================
table              holds
=================  ===========================================================
compounds          one row per compound: display name, unique matching key
                   (:func:`matcher.chem.names.matching_key`), CAS number (check digit
                   verified), Hill formula and its nominal mass, InChIKey,
                   SMILES, notes, homologous ``series`` label, ``key_ions``
synonyms           other names of a compound, each with a unique matching key
phases             stationary phases: generic composition, class, McReynolds
                   constants x' y' z' u' s' where known
observations       one retention index (or a literature summary with ``ri_sd``
                   and ``n``) of a compound on a phase class, with provenance;
                   retired rows stay, flagged inactive with the reason
spectra            reference mass spectra of a compound (EI, centroided): the
                   m/z:intensity pairs as canonical text, where the spectrum
                   came from (``source``, JCAMP-DX ``##ORIGIN``/``##OWNER``),
                   the other records of its JCAMP-DX block (kept for a
                   lossless export), who imported it and when
audit_log          every change: when, who, action, target, before/after JSON
library_state      one row: the library ``revision``, bumped on every change
schema_version     the migrations applied (see :mod:`matcher.store.database`)
=================  ===========================================================

Bounded text columns are ``VARCHAR(n)`` on SQLite (which does not enforce the
bound) and unbounded ``TEXT`` on PostgreSQL (which would), so a library holds
exactly the same values on both backends and copies between them losslessly.

Times are stored as ISO-8601 text in UTC so that every backend round-trips
them identically; observation dates are ISO dates (``YYYY-MM-DD``) as text.
"""

from __future__ import annotations

from typing import Optional

from sqlalchemy import (
    Boolean,
    CheckConstraint,
    Float,
    ForeignKey,
    Index,
    Integer,
    String,
    Text,
)
from sqlalchemy.orm import DeclarativeBase, Mapped, mapped_column, relationship

from matcher.rules import MODES, PHASE_CLASSES

_CLASS_CHECK = "phase_class IN (" + ", ".join(f"'{c}'" for c in PHASE_CLASSES) + ")"


def Str(length: int):
    """``VARCHAR(length)`` on SQLite, ``TEXT`` on PostgreSQL (see the module notes)."""
    return String(length).with_variant(Text(), "postgresql")


class Base(DeclarativeBase):
    pass


class Compound(Base):
    __tablename__ = "compounds"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    name: Mapped[str] = mapped_column(Str(300))
    key: Mapped[str] = mapped_column(Str(300), unique=True)
    cas: Mapped[Optional[str]] = mapped_column(Str(12), index=True)
    formula: Mapped[Optional[str]] = mapped_column(Str(100))
    nominal_mass: Mapped[Optional[int]] = mapped_column(Integer)
    inchikey: Mapped[Optional[str]] = mapped_column(Str(27), index=True)
    smiles: Mapped[Optional[str]] = mapped_column(Text)
    notes: Mapped[Optional[str]] = mapped_column(Text)
    series: Mapped[Optional[str]] = mapped_column(Str(100))
    key_ions: Mapped[Optional[str]] = mapped_column(Str(200))
    created_at: Mapped[str] = mapped_column(Str(32))

    synonyms: Mapped[list["Synonym"]] = relationship(
        back_populates="compound", cascade="all, delete-orphan", order_by="Synonym.id"
    )
    observations: Mapped[list["Observation"]] = relationship(
        back_populates="compound", cascade="all, delete-orphan", order_by="Observation.id"
    )
    spectra: Mapped[list["Spectrum"]] = relationship(
        back_populates="compound", cascade="all, delete-orphan", order_by="Spectrum.id"
    )


class Synonym(Base):
    __tablename__ = "synonyms"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    compound_id: Mapped[int] = mapped_column(ForeignKey("compounds.id", ondelete="CASCADE"), index=True)
    name: Mapped[str] = mapped_column(Str(300))
    key: Mapped[str] = mapped_column(Str(300), unique=True)

    compound: Mapped[Compound] = relationship(back_populates="synonyms")


class Phase(Base):
    __tablename__ = "phases"
    __table_args__ = (CheckConstraint(_CLASS_CHECK, name="ck_phases_class"),)

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    name: Mapped[str] = mapped_column(Str(200), unique=True)
    phase_class: Mapped[str] = mapped_column(Str(20))
    x: Mapped[Optional[float]] = mapped_column(Float)
    y: Mapped[Optional[float]] = mapped_column(Float)
    z: Mapped[Optional[float]] = mapped_column(Float)
    u: Mapped[Optional[float]] = mapped_column(Float)
    s: Mapped[Optional[float]] = mapped_column(Float)
    source: Mapped[Optional[str]] = mapped_column(Text)


class Observation(Base):
    __tablename__ = "observations"
    __table_args__ = (
        CheckConstraint(_CLASS_CHECK, name="ck_observations_class"),
        CheckConstraint("mode IN (" + ", ".join(f"'{m}'" for m in MODES) + ")", name="ck_observations_mode"),
        CheckConstraint("n IS NULL OR n >= 1", name="ck_observations_n"),
        CheckConstraint("ri_sd IS NULL OR ri_sd >= 0", name="ck_observations_sd"),
        Index("ix_observations_active_class", "active", "phase_class"),
    )

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    compound_id: Mapped[int] = mapped_column(ForeignKey("compounds.id", ondelete="CASCADE"), index=True)
    phase_class: Mapped[str] = mapped_column(Str(20))
    phase_id: Mapped[Optional[int]] = mapped_column(ForeignKey("phases.id", ondelete="RESTRICT"))
    ri: Mapped[float] = mapped_column(Float)
    mode: Mapped[str] = mapped_column(Str(12), default="programmed")
    ri_sd: Mapped[Optional[float]] = mapped_column(Float)
    n: Mapped[Optional[int]] = mapped_column(Integer)
    source: Mapped[Optional[str]] = mapped_column(Text)
    analyst: Mapped[Optional[str]] = mapped_column(Str(100))
    date: Mapped[Optional[str]] = mapped_column(Str(10))
    active: Mapped[bool] = mapped_column(Boolean, default=True)
    retired_reason: Mapped[Optional[str]] = mapped_column(Text)
    retired_at: Mapped[Optional[str]] = mapped_column(Str(32))
    created_at: Mapped[str] = mapped_column(Str(32))

    compound: Mapped[Compound] = relationship(back_populates="observations")
    phase: Mapped[Optional[Phase]] = relationship()


class Spectrum(Base):
    """One reference mass spectrum of a compound (added by schema version 2)."""

    __tablename__ = "spectra"
    __table_args__ = (CheckConstraint("n_peaks >= 1", name="ck_spectra_n_peaks"),)

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    compound_id: Mapped[int] = mapped_column(ForeignKey("compounds.id", ondelete="CASCADE"), index=True)
    title: Mapped[str] = mapped_column(Str(300))
    peaks: Mapped[str] = mapped_column(Text)  # "m/z:intensity" pairs, ascending m/z (matcher.io.spectrum_text)
    n_peaks: Mapped[int] = mapped_column(Integer)
    source: Mapped[Optional[str]] = mapped_column(Text)  # provenance given on import (own standard, licensed collection)
    origin: Mapped[Optional[str]] = mapped_column(Text)  # JCAMP-DX ##ORIGIN
    owner: Mapped[Optional[str]] = mapped_column(Text)  # JCAMP-DX ##OWNER
    records: Mapped[Optional[str]] = mapped_column(Text)  # JSON list of [label, value]: the block's other records
    file: Mapped[Optional[str]] = mapped_column(Text)  # file name and block it was imported from
    analyst: Mapped[Optional[str]] = mapped_column(Str(100))
    created_at: Mapped[str] = mapped_column(Str(32))

    compound: Mapped[Compound] = relationship(back_populates="spectra")


class AuditEntry(Base):
    __tablename__ = "audit_log"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    at: Mapped[str] = mapped_column(Str(32))
    who: Mapped[str] = mapped_column(Str(100))
    action: Mapped[str] = mapped_column(Str(40))
    target: Mapped[str] = mapped_column(Str(300), index=True)
    before: Mapped[Optional[str]] = mapped_column(Text)  # JSON
    after: Mapped[Optional[str]] = mapped_column(Text)  # JSON
    revision: Mapped[int] = mapped_column(Integer)


class LibraryState(Base):
    __tablename__ = "library_state"
    __table_args__ = (CheckConstraint("id = 1", name="ck_library_state_single"),)

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    revision: Mapped[int] = mapped_column(Integer, default=0)
    changed_at: Mapped[str] = mapped_column(Str(32))


class SchemaVersion(Base):
    __tablename__ = "schema_version"

    version: Mapped[int] = mapped_column(Integer, primary_key=True, autoincrement=False)
    description: Mapped[str] = mapped_column(Text)
    applied_at: Mapped[str] = mapped_column(Str(32))


__all__ = [
    "MODES", "Base", "Compound", "Synonym", "Phase", "Observation", "Spectrum",
    "AuditEntry", "LibraryState", "SchemaVersion",
]
