"""Finding the columns of an export by their header spellings.

Headers are compared after normalising: case, spaces, punctuation and a trailing unit in
brackets are ignored ("Qty. Inspected", "qty inspected" and "QTY_INSPECTED" are the same),
except that a one-letter header keeps its case ("n" units sampled, "N" lot size).
An explicit mapping (``--columns inspected="Checked Qty"``) overrides the spellings.
"""

from __future__ import annotations

import re
import unicodedata
from dataclasses import dataclass

from qualbayes.data.readers import RawTable
from qualbayes.errors import InputError, OptionError

#: Title rows above the header are common in exports. The header search is bounded: at most
#: this many rows, each at most readers.MAX_COLUMNS cells wide (the readers refuse wider rows
#: before keeping them), each cell normalised from at most 200 characters.
HEADER_SEARCH_ROWS = 20

#: Header spellings of ERP and quality-system exports, by column key, tried after the
#: spellings each schema lists itself (so an existing file reads as before). English, German
#: and French, as plants export them; each spelling is one key's only (tested).
EXPORT_SPELLINGS: dict[str, tuple[str, ...]] = {
    # incoming-inspection lots
    "lot": ("Inspection lot", "Inspection lot no.", "Insp. lot", "Batch No.", "Batch Number",
            "Prüflos", "Prüflosnummer", "Los", "Losnummer", "Charge", "Chargennummer",
            "Lot de contrôle", "Numéro de lot", "N° de lot", "Lot n°"),
    "inspected": ("Sample Qty", "Sample Quantity", "Inspected Qty", "Inspected Quantity",
                  "Insp. Qty", "Qty Tested", "Tested Qty", "Stichprobenumfang",
                  "Stichprobengröße", "Stichprobe", "Prüfmenge", "Geprüfte Menge",
                  "Anzahl geprüft", "Taille de l'échantillon", "Taille échantillon",
                  "Échantillon", "Quantité contrôlée", "Qté contrôlée"),
    "defectives": ("Defective qty", "Defective Quantity", "Qty Defective", "Defective units",
                   "No. defective", "Nonconforming Qty", "NC Qty", "Rejected Qty",
                   "Reject Qty", "Fehlerhafte Teile", "Anzahl fehlerhaft", "Fehlerhaft",
                   "Ausschuss", "Ausschussmenge", "n.i.O.", "n.i.O. Teile",
                   "Quantité défectueuse", "Qté défectueuse", "Défectueux",
                   "Pièces défectueuses", "Non conformes", "Quantité non conforme", "Rebuts"),
    "lot_size": ("Received Qty", "Receipt Qty", "GR Qty", "Delivery Qty", "Delivered Qty",
                 "Losgröße", "Losumfang", "Liefermenge", "Eingangsmenge", "Taille du lot",
                 "Quantité du lot", "Quantité reçue", "Qté reçue"),
    "part": ("Material No.", "Material Number", "Item No.", "Item Number", "Article",
             "Materialnummer", "Sachnummer", "Teilenummer", "Artikelnummer", "Référence",
             "Numéro de pièce", "Code article"),
    "supplier": ("Supplier No.", "Supplier Code", "Vendor No.", "Vendor Number", "Lieferant",
                 "Lieferantenname", "Fournisseur", "Nom du fournisseur"),
    "date": ("Insp. start date", "Inspection start date", "Inspection start", "Insp. date",
             "GR Date", "Posting Date", "Datum", "Prüfdatum", "Prüfbeginn", "Eingangsdatum",
             "Wareneingangsdatum", "Date de contrôle", "Date d'inspection",
             "Date de réception"),
    # life tests and field returns
    "unit": ("Unit serial", "Seriennummer", "Prüfling", "Numéro de série", "N° de série",
             "Éprouvette"),
    "time": ("Operating time", "Hours run", "Test hours", "Cycles to failure", "Laufzeit",
             "Betriebsstunden", "Zyklen", "Lastwechsel", "Laufleistung",
             "Durée de fonctionnement", "Heures de fonctionnement", "Cycles à rupture",
             "Kilométrage"),
    "status": ("Failure status", "Zustand", "Ausfall", "Ergebnis", "Statut", "État",
               "Défaillance", "Résultat"),
    "group": ("Design rev", "Design rev.", "Revision level", "Gruppe", "Variante",
              "Konstruktionsstand", "Groupe", "Révision", "Indice"),
}


@dataclass(frozen=True)
class Column:
    key: str
    spellings: tuple[str, ...]
    required: bool = True
    label: str = ""


def normalise(header: object) -> str:
    """Comparable form of a header: compatibility-normalised (full-width letters become
    plain), case-folded, without spaces, punctuation or a bracketed unit, in any script.
    A header of one letter keeps its case: "n" (units sampled) and "N" (lot size) differ."""
    text = "" if header is None else str(header)
    if len(text) > 200:
        return ""  # not a header; no spelling is this long
    text = unicodedata.normalize("NFKC", text)
    text = re.sub(r"\[[^\]]*\]|\([^)]*\)", "", text)  # "Time (h)" -> "Time"
    core = re.sub(r"[\W_]+", "", text)
    return core if len(core) == 1 else core.casefold()


@dataclass
class Located:
    """Where each wanted column is: key -> (column index, header text as written)."""

    header_row: int
    columns: dict[str, tuple[int, str]]
    first_data: int  # index into table.rows
    unused: tuple[str, ...] = ()  # headers of the header row that no key took


def spellings(col: Column) -> tuple[str, ...]:
    """Every spelling of a column: its schema's own, then the export spellings."""
    return col.spellings + EXPORT_SPELLINGS.get(col.key, ())


def unused_note(unused: tuple[str, ...]) -> list[str]:
    """The note naming the columns of the file that were not read (empty when all were)."""
    if not unused:
        return []
    return [f"columns not used: {', '.join(repr(h) for h in unused)} (name one with "
            "--columns key=Header if it should be)"]


def parse_mapping(text: str | None) -> dict[str, str]:
    """``lot=Batch,inspected=Qty Checked`` -> {"lot": "Batch", "inspected": "Qty Checked"}."""
    if not text:
        return {}
    out: dict[str, str] = {}
    for part in text.split(","):
        if "=" not in part:
            raise OptionError(f"--columns: {part!r} is not of the form key=Header")
        key, header = (s.strip().strip('"').strip("'") for s in part.split("=", 1))
        out[key.lower()] = header
    return out


def locate(table: RawTable, schema: tuple[Column, ...],
           mapping: dict[str, str] | None = None) -> Located:
    """Find the header row (the first of the top rows naming every required column)."""
    mapping = mapping or {}
    known = {c.key for c in schema}
    for key in mapping:
        if key not in known:
            raise OptionError(f"--columns: unknown key {key!r}; the keys are "
                              f"{', '.join(sorted(known))}")
    if not table.rows:
        raise table.error("the sheet is empty")
    best: tuple[int, dict, list[str]] | None = None
    for i, row in enumerate(table.rows[:HEADER_SEARCH_ROWS]):
        found, missing = _match(row, schema, mapping)
        if not missing:
            _check_duplicate_headers(table, i, row, found)
            _check_shared_columns(table, i, found, mapping)
            taken = {j for j, _ in found.values()}
            unused = tuple(str(h).strip()[:60] for j, h in enumerate(row)
                           if j not in taken and h is not None and str(h).strip())
            return Located(table.row_numbers[i], found, i + 1, unused)
        if best is None or len(found) > len(best[1]):
            best = (i, found, missing)
    assert best is not None
    i, found, missing = best
    wanted = "; ".join(f"{c.key} (e.g. {', '.join(repr(s) for s in c.spellings[:4])})"
                       for c in schema if c.key in missing)
    raise InputError(f"missing column(s): {wanted}. Name them with --columns key=Header",
                     file=table.file, sheet=table.sheet, row=table.row_numbers[i])


def _match(row: list[object], schema: tuple[Column, ...], mapping: dict[str, str]):
    norm = [normalise(h) for h in row]
    found: dict[str, tuple[int, str]] = {}
    # columns named explicitly are taken first and are not matched again by spelling
    named = [normalise(mapping[c.key]) for c in schema if c.key in mapping]
    mapped = {norm.index(t) for t in named if t and t in norm}
    for col in schema:
        explicit = col.key in mapping
        targets = [normalise(mapping[col.key])] if explicit else [
            normalise(s) for s in spellings(col)]
        for t in targets:
            if not t:
                continue
            hits = [j for j, h in enumerate(norm) if h == t and (explicit or j not in mapped)]
            if hits:
                found[col.key] = (hits[0], str(row[hits[0]]).strip())
                break
    missing = [c.key for c in schema if c.required and c.key not in found]
    return found, missing


def _check_shared_columns(table: RawTable, i: int, found: dict, mapping: dict) -> None:
    """One column cannot be two things ("N" is a spelling of both the sample size and the
    lot size once case is ignored): ask the engineer which it is."""
    by_column: dict[int, list[str]] = {}
    for key, (j, _) in found.items():
        by_column.setdefault(j, []).append(key)
    for keys in by_column.values():
        if len(keys) > 1 and not any(k in mapping for k in keys):
            text = found[keys[0]][1]
            choices = " or ".join(f"--columns {k}={text!r}" for k in keys)
            raise InputError(f"column {text!r} could be {' or '.join(keys)}; say which with "
                             f"{choices}", file=table.file, sheet=table.sheet,
                             row=table.row_numbers[i], column=text)


def _check_duplicate_headers(table: RawTable, i: int, row: list[object], found: dict) -> None:
    norm = [normalise(h) for h in row]
    for key, (j, text) in found.items():
        if norm.count(norm[j]) > 1:
            raise InputError(f"two columns are headed {text!r}; which one is {key}? Rename one "
                             "or use --columns", file=table.file, sheet=table.sheet,
                             row=table.row_numbers[i], column=text)


def cell(table: RawTable, located: Located, i: int, key: str) -> object:
    """The raw cell of data row ``i`` (index into table.rows) in column ``key``."""
    if key not in located.columns:
        return None
    j = located.columns[key][0]
    row = table.rows[i]
    if (i, j) in table.formula_cells and (j >= len(row) or row[j] is None):
        raise InputError(f"formula {table.formula_cells[(i, j)]!r} has no saved value; open "
                         "the file in a spreadsheet program, recalculate and save it",
                         file=table.file, sheet=table.sheet, row=table.row_numbers[i],
                         column=located.columns[key][1])
    return row[j] if j < len(row) else None


def number_style(table: RawTable, located: Located, keys: tuple[str, ...]):
    """The decimal mark of the file, decided from every cell of its number columns
    (:func:`qualbayes.data.numbers.decide`); two that disagree are refused."""
    from qualbayes.data.numbers import decide  # noqa: PLC0415

    cols = [(located.columns[k][0], located.columns[k][1]) for k in keys
            if k in located.columns]

    def cells():
        for i in range(located.first_data, len(table.rows)):
            row = table.rows[i]
            for j, name in cols:
                if j < len(row) and isinstance(row[j], str):
                    yield row[j], table.row_numbers[i], name

    try:
        return decide(cells())
    except ValueError as err:
        raise table.error(str(err)) from None
