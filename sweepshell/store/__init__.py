"""The results store: layout (names), writer (template, blocks) and reader."""
