"""A small element tree built with the standard library's html.parser, for page tests."""

from __future__ import annotations

from collections.abc import Callable, Iterator
from dataclasses import dataclass, field
from html.parser import HTMLParser

VOID = frozenset(
    {"area", "base", "br", "col", "embed", "hr", "img", "input", "link", "meta", "source", "wbr"}
)


@dataclass
class Node:
    tag: str
    attrs: dict[str, str]
    children: list[Node | str] = field(default_factory=list)
    parent: Node | None = None

    def get(self, name: str, default: str | None = None) -> str | None:
        return self.attrs.get(name, default)

    @property
    def classes(self) -> set[str]:
        return set((self.attrs.get("class") or "").split())

    def iter(self) -> Iterator[Node]:
        for child in self.children:
            if isinstance(child, Node):
                yield child
                yield from child.iter()

    def text(self) -> str:
        parts: list[str] = []
        for child in self.children:
            parts.append(child if isinstance(child, str) else child.text())
        return " ".join(" ".join(parts).split())

    def find_all(
        self,
        tag: str | None = None,
        *,
        id: str | None = None,
        cls: str | None = None,
        where: Callable[[Node], bool] | None = None,
    ) -> list[Node]:
        return [
            node
            for node in self.iter()
            if (tag is None or node.tag == tag)
            and (id is None or node.attrs.get("id") == id)
            and (cls is None or cls in node.classes)
            and (where is None or where(node))
        ]

    def find(self, tag: str | None = None, **kwargs: object) -> Node | None:
        found = self.find_all(tag, **kwargs)  # type: ignore[arg-type]
        return found[0] if found else None

    def by_id(self, element_id: str) -> Node:
        node = self.find(id=element_id)
        assert node is not None, f"no element with id {element_id!r}"
        return node


class _Builder(HTMLParser):
    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.root = Node("#root", {})
        self.current = self.root

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        node = Node(tag, {k: v if v is not None else "" for k, v in attrs}, parent=self.current)
        self.current.children.append(node)
        if tag not in VOID:
            self.current = node

    def handle_startendtag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        node = Node(tag, {k: v if v is not None else "" for k, v in attrs}, parent=self.current)
        self.current.children.append(node)

    def handle_endtag(self, tag: str) -> None:
        node: Node | None = self.current
        while node is not None and node.tag != tag:
            node = node.parent
        if node is not None and node.parent is not None:
            self.current = node.parent

    def handle_data(self, data: str) -> None:
        if data.strip():
            self.current.children.append(data)


def parse_html(text: str) -> Node:
    builder = _Builder()
    builder.feed(text)
    builder.close()
    return builder.root


def unlabelled_controls(root: Node) -> list[str]:
    """Form controls a person cannot tell apart: no <label for=...>, no wrapping label."""
    labelled = {node.get("for") for node in root.find_all("label")}
    missing = []
    for node in root.find_all(where=lambda n: n.tag in {"input", "select", "textarea"}):
        if node.get("type") in {"hidden", "submit", "button"}:
            continue
        if node.get("id") in labelled or node.get("aria-label") or node.get("aria-labelledby"):
            continue
        missing.append(node.get("name") or "?")
    return missing


def duplicate_ids(root: Node) -> list[str]:
    seen: set[str] = set()
    duplicates = []
    for node in root.iter():
        element_id = node.get("id")
        if element_id:
            if element_id in seen:
                duplicates.append(element_id)
            seen.add(element_id)
    return duplicates
