"""The one AdamW set-up for continued pretraining and fine-tuning: which parameters get weight decay."""

from __future__ import annotations

from typing import Iterable

import torch


def build_adamw(model_or_named_params: torch.nn.Module | Iterable[tuple[str, torch.nn.Parameter]],
                learning_rate: float, weight_decay: float, device: torch.device | str | None = None
                ) -> torch.optim.AdamW:
    """AdamW over the trainable parameters in two groups: ``weight_decay`` on matrices and embeddings, none on
    tensors with fewer than 2 dimensions (biases and LayerNorm weights; common practice since BERT).

    Groups are ``[decay, no_decay]`` in parameter order. ``device`` (default: where the first parameter is)
    picks the fused kernel on CPU and CUDA: several times faster there, and deterministic."""
    named = (model_or_named_params.named_parameters() if isinstance(model_or_named_params, torch.nn.Module)
             else model_or_named_params)
    decay, no_decay = [], []
    for _, param in named:
        if param.requires_grad:
            (no_decay if param.ndim < 2 else decay).append(param)
    params = decay + no_decay
    if not params:
        raise RuntimeError("build_adamw: the model has no trainable parameters")
    device_type = torch.device(device).type if device is not None else params[0].device.type
    return torch.optim.AdamW([{"params": decay, "weight_decay": weight_decay},
                              {"params": no_decay, "weight_decay": 0.0}],
                             lr=learning_rate, fused=device_type in ("cpu", "cuda"))
