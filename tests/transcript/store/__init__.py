"""Store-layer tests kept beside the package layout (a package, so module names do not clash)."""
