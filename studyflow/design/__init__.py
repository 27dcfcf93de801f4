"""Case design: parameter spaces x mesh family -> case table with stable ids."""

from .cases import Case, Point, Design, build_design
from .ids import case_id, format_value
from .mesh import MeshLevel, h_from_cells, h_from_counts, h_from_spacings, mesh_dim, mesh_levels
from .params import expand_points

__all__ = [
    "Case", "Point", "Design", "build_design", "case_id", "format_value", "MeshLevel", "h_from_cells",
    "h_from_counts", "h_from_spacings", "mesh_dim", "mesh_levels", "expand_points",
]
