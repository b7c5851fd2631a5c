"""A small HTML reader for page tests: forms, their values, and the message beside a field."""

from __future__ import annotations

from dataclasses import dataclass, field
from html.parser import HTMLParser

VOID = {"area", "base", "br", "col", "embed", "hr", "img", "input", "link", "meta", "source"}


@dataclass
class Element:
    tag: str
    attrs: dict[str, str]
    parent: Element | None = None
    children: list[Element | str] = field(default_factory=list)

    @property
    def classes(self) -> set[str]:
        return set(self.attrs.get("class", "").split())

    def text(self) -> str:
        parts = [c if isinstance(c, str) else c.text() for c in self.children]
        return " ".join(" ".join(parts).split())

    def iter(self) -> list[Element]:
        found: list[Element] = []
        for child in self.children:
            if isinstance(child, Element):
                found.append(child)
                found.extend(child.iter())
        return found

    def find_all(
        self, tag: str | None = None, cls: str | None = None, **attrs: str
    ) -> list[Element]:
        return [
            e
            for e in self.iter()
            if (tag is None or e.tag == tag)
            and (cls is None or cls in e.classes)
            and all(e.attrs.get(key) == value for key, value in attrs.items())
        ]

    def find(self, tag: str | None = None, cls: str | None = None, **attrs: str) -> Element:
        found = self.find_all(tag, cls, **attrs)
        assert found, f"no <{tag or '*'}> with class={cls} {attrs}"
        return found[0]

    def closest(self, cls: str) -> Element | None:
        node = self.parent
        while node is not None and cls not in node.classes:
            node = node.parent
        return node


class _Builder(HTMLParser):
    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.root = Element("#document", {})
        self.current = self.root

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        element = Element(tag, {k: v or "" for k, v in attrs}, parent=self.current)
        self.current.children.append(element)
        if tag not in VOID:
            self.current = element

    def handle_startendtag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        self.current.children.append(Element(tag, {k: v or "" for k, v in attrs}, self.current))

    def handle_endtag(self, tag: str) -> None:
        node: Element | None = self.current
        while node is not None and node.tag != tag:
            node = node.parent
        if node is not None and node.parent is not None:
            self.current = node.parent

    def handle_data(self, data: str) -> None:
        self.current.children.append(data)


def parse(html: str) -> Element:
    builder = _Builder()
    builder.feed(html)
    builder.close()
    return builder.root


class Form:
    """One <form method="post">, found by its action (and, if several share it, a value)."""

    def __init__(self, page: Element, action: str, **having: str) -> None:
        posting = page.find_all("form", action=action, method="post")
        forms = [Form._of(element) for element in posting]
        matching = [f for f in forms if all(f.has(k, v) for k, v in having.items())]
        assert matching, f"no form posting to {action} with {having}"
        self.element = matching[0].element

    @classmethod
    def _of(cls, element: Element) -> Form:
        form = cls.__new__(cls)
        form.element = element
        return form

    def control(self, name: str) -> Element:
        for element in self.element.iter():
            if element.tag in {"input", "select", "textarea"} and element.attrs.get("name") == name:
                return element
        raise AssertionError(f"no field named {name!r} in the form")

    def has(self, name: str, value: str) -> bool:
        try:
            return self.value(name) == value
        except AssertionError:
            return False

    def value(self, name: str) -> str:
        """What the browser would show in the field: value, selected option or text."""
        control = self.control(name)
        if control.tag == "textarea":
            return "".join(c for c in control.children if isinstance(c, str))
        if control.tag == "select":
            chosen = [
                o.attrs.get("value", "")
                for o in control.find_all("option")
                if "selected" in o.attrs
            ]
            return ",".join(chosen)
        return control.attrs.get("value", "")

    def error(self, name: str) -> str:
        """The message shown beside a field ('' when there is none)."""
        control = self.control(name)
        box = control.closest("field") or control.parent
        assert box is not None
        messages = box.find_all(cls="field-error")
        return " ".join(m.text() for m in messages)

    def errors(self) -> list[str]:
        """Every message in the form, beside a field or for the form as a whole."""
        found = self.element.find_all(cls="field-error") + self.element.find_all(cls="form-error")
        return [e.text() for e in found]


def ids_are_unique_and_labels_point_at_fields(page: Element) -> None:
    ids = [e.attrs["id"] for e in page.iter() if "id" in e.attrs]
    repeated = sorted({i for i in ids if ids.count(i) > 1})
    assert repeated == [], f"ids used more than once: {repeated}"
    for label in page.find_all("label"):
        target = label.attrs.get("for")
        if target:
            assert target in ids, f"label for={target!r} points at nothing"
