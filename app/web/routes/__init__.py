"""One APIRouter per resource."""
