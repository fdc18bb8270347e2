"""The stored result of a movement check: a proposed position compared with a published one."""

from __future__ import annotations

from django.conf import settings
from django.db import models
from django.db.models import Q

from .choices import TextChoices


class MovementVerdict(TextChoices):
    NO_MOVEMENT = "no_movement", "no movement shown"
    POSSIBLE_MOVEMENT = "possible_movement", "possible movement"
    NOT_COMPARED = "not_compared", "nothing to compare with"


class CheckStage(TextChoices):
    PROPOSED = "proposed", "when proposed"
    PUBLISHED = "published", "at publication"


class MovementCheck(models.Model):
    """One run of ``services.movement`` for ``position``; the one made at publication is kept with the decision.

    Differences, their detectable sizes and the added uncertainty are in metres (east, north, up at
    the published point, in the proposal's frame and epoch). ``frame_chain`` lists, in words, how the
    published position was brought to the proposal's frame and epoch; ``warnings`` what to beware of.
    """

    position = models.ForeignKey("registry.Position", on_delete=models.PROTECT, related_name="movement_checks")
    compared_with = models.ForeignKey(
        "registry.Position", null=True, blank=True, on_delete=models.PROTECT, related_name="+"
    )
    stage = models.CharField(max_length=10, choices=CheckStage.choices)
    verdict = models.CharField(max_length=20, choices=MovementVerdict.choices)
    level = models.FloatField(help_text="Level α of the global test.")
    power = models.FloatField(help_text="Power used for the detectable movement.")
    statistic = models.FloatField(null=True, blank=True)
    dof = models.PositiveSmallIntegerField(null=True, blank=True)
    critical = models.FloatField(null=True, blank=True)
    p_value = models.FloatField(null=True, blank=True)
    statistic_horizontal = models.FloatField(null=True, blank=True)
    statistic_vertical = models.FloatField(null=True, blank=True)
    moved_horizontal = models.BooleanField(null=True, blank=True)
    moved_vertical = models.BooleanField(null=True, blank=True)
    d_east_m = models.FloatField(null=True, blank=True)
    d_north_m = models.FloatField(null=True, blank=True)
    d_up_m = models.FloatField(null=True, blank=True)
    detectable_east_m = models.FloatField(null=True, blank=True)
    detectable_north_m = models.FloatField(null=True, blank=True)
    detectable_up_m = models.FloatField(null=True, blank=True)
    added_sigma_east_m = models.FloatField(null=True, blank=True)
    added_sigma_north_m = models.FloatField(null=True, blank=True)
    added_sigma_up_m = models.FloatField(null=True, blank=True)
    above_threshold = models.BooleanField(
        default=False, help_text="The detectable movement exceeds the office's threshold."
    )
    used_velocity = models.BooleanField(default=False)
    frame_chain = models.JSONField(default=list, blank=True)
    warnings = models.JSONField(default=list, blank=True)
    reason = models.TextField(blank=True, help_text="Why nothing was compared.")
    created_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.SET_NULL, related_name="+"
    )
    created_at = models.DateTimeField(auto_now_add=True)

    class Meta:
        ordering = ["position", "-created_at", "-id"]
        indexes = [models.Index(fields=["position", "stage"], name="movement_check_position")]
        constraints = [
            models.CheckConstraint(condition=Q(level__gt=0, level__lt=1), name="movement_check_level_range"),
            models.CheckConstraint(condition=Q(power__gt=0, power__lt=1), name="movement_check_power_range"),
            models.CheckConstraint(
                condition=Q(verdict="not_compared") | Q(compared_with__isnull=False, statistic__isnull=False),
                name="movement_check_compared_has_result",
            ),
        ]

    def __str__(self) -> str:
        return f"movement check of position {self.position_id}: {self.get_verdict_display()}"

    @property
    def detectable_m(self) -> tuple[float | None, float | None, float | None]:
        return (self.detectable_east_m, self.detectable_north_m, self.detectable_up_m)

    @property
    def d_m(self) -> tuple[float | None, float | None, float | None]:
        return (self.d_east_m, self.d_north_m, self.d_up_m)
