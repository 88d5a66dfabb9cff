"""The ``.model``, ``.temp`` and ``.options temp= tnom=`` cards, as ngspice reads them for R, C and L.

``model.netlist``'s reader inherits these; the element readers (``model.netlist_cards``) look the models
and temperatures up when they read an R, C or L card (formulas in ``model.device_models``). Safety: these
paths only turn whitelisted keys and numbers into floats; a card of any other type is refused.
"""

from __future__ import annotations

from crosscheck.errors import NetlistError
from crosscheck.model.device_models import MODEL_KINDS, ModelProblem, model_parameter, other_model_type
from crosscheck.model.netlist_cards import Card, CardReader, DeviceModel, Tok, show
from crosscheck.model.netlist_subset import SUBSET


class ModelCardReader(CardReader):
    """``.model`` and temperature cards; the models and temperatures live on ``CardReader``."""

    def fields(self, card: Card) -> list[Tok]:
        """A card's fields; the file-level reader (``model.netlist``) provides the splitting."""
        raise NotImplementedError

    def model_card(self, card: Card) -> None:
        """``.model NAME TYPE [(] key=value ... [)]``: R (or RES), C and L are kept; other types are refused.

        A refused card's name is remembered, so the elements that use it are not blamed for it again."""
        try:
            self.read_model_card(card)
        except NetlistError:
            fields = self.fields(card)
            if len(fields) > 1:
                self.refused_models.add(fields[1].text.lower())
            raise

    def read_model_card(self, card: Card) -> None:
        flat: list[Tok] = []
        for t in self.fields(card)[1:]:
            if t.value is None and t.text.startswith("("):
                flat += self.fields(Card(t.text[1:-1], t.line, [(0, t.line)]))
            else:
                flat.append(t)
        if len(flat) < 2 or flat[0].value is not None or flat[1].value is not None:
            raise self.err(".model needs a name and a type: .model NAME R (rsh=...)", card.line)
        name, type_name = self.name(flat[0], ".model name"), flat[1].text
        kind = MODEL_KINDS.get(type_name.lower())
        if kind is None:
            what = other_model_type(type_name)
            why = f"type {type_name.upper()} is {what}" if what else f"unknown model type {show(type_name)}"
            raise self.err(
                f".model {flat[0].text}: {why}; crosscheck reads .model cards of type R (or RES), C and L "
                f"only ({SUBSET})",
                flat[1].line,
            )
        if name in self.models:
            raise self.err(
                f".model {name} is defined twice (first at line {self.models[name].line}); keep one", card.line
            )
        params: dict[str, Tok] = {}
        for t in flat[2:]:
            if t.value is None:
                raise self.err(f".model {name}: unexpected field {show(t.text)}; write parameters as key=value", t.line)
            try:
                canonical, why_ignored = model_parameter(kind, t.text)
            except ModelProblem as exc:
                raise self.err(f".model {name}: {exc}", t.line) from None
            if canonical is None:
                self.note(f".model {name}: {t.text}= ignored: {why_ignored}", t.line)
            elif canonical in params:
                raise self.err(f".model {name}: {t.text}= is given twice (or with another spelling); keep one", t.line)
            else:
                params[canonical] = t.value
        self.models[name] = DeviceModel(name, kind, card.line, params)

    def temp_card(self, card: Card) -> None:
        """``.temp T``: the circuit temperature in °C (one value: crosscheck runs one temperature)."""
        toks = self.fields(card)[1:]
        if len(toks) != 1 or toks[0].value is not None:
            raise self.err(
                ".temp takes one temperature in °C (.temp 50); for several temperatures run one netlist per "
                "temperature",
                card.line,
            )
        self.set_temperature("temp", toks[0], ".temp")

    def options_temperature(self, card: Card) -> None:
        """Read ``temp=`` and ``tnom=`` from an ``.options`` card (the other options are the caller's to note)."""
        for t in self.fields(card)[1:]:
            if t.value is not None and t.text.lower() in ("temp", "tnom"):
                self.set_temperature(t.text.lower(), t.value, f".options {t.text.lower()}")

    def set_temperature(self, key: str, tok: Tok, what: str) -> None:
        if key in self.temp_lines:
            raise self.err(
                f"{what}: the {'circuit' if key == 'temp' else 'nominal'} temperature is set twice "
                f"(first at line {self.temp_lines[key]}); keep one",
                tok.line,
            )
        setattr(self.temps, key, self.value(tok, what, "temperature in °C"))
        self.temp_lines[key] = tok.line
