"""The encoder's last layer computed only where the MLM loss reads it: at the masked positions.

The loss uses the final hidden states of the masked positions (about 15%) alone. In the last layer of a post-norm
BERT-family encoder, keys and values need every position, but the query projection, the attention output, the
feed-forward block and both layer norms act position by position, so computing them at the masked positions only
gives the same loss and the same gradients (up to float summation order) with about 12% fewer matmul FLOPs on a
6-layer encoder. Layers of another shape (relative positions, pre-norm, decoders, chunked feed-forward) fall back to
the full forward.
"""

from __future__ import annotations

import torch
import torch.nn.functional as F

# post-norm encoder layers whose parts are named as in BERT (attention.self.{query,key,value}, attention.output,
# intermediate, output) and whose attention has no position term of its own
_LAYERS = {"BertLayer", "RobertaLayer", "XLMRobertaLayer", "CamembertLayer", "ElectraLayer"}


def supports_masked_final_layer(body: torch.nn.Module) -> bool:
    """Whether ``body`` (the encoder under the MLM head) is one whose last layer can run at masked positions."""
    config, layers = getattr(body, "config", None), getattr(getattr(body, "encoder", None), "layer", None)
    if config is None or not isinstance(layers, torch.nn.ModuleList) or len(layers) == 0:
        return False
    last = layers[-1]
    return (type(last).__name__ in _LAYERS and not getattr(config, "is_decoder", False)
            and not getattr(config, "add_cross_attention", False)
            and getattr(config, "position_embedding_type", "absolute") == "absolute"
            and not getattr(last, "chunk_size_feed_forward", 0)
            and getattr(body, "pooler", None) is None)


def final_states_at(body: torch.nn.Module, input_ids: torch.Tensor, attention_mask: torch.Tensor,
                    selected: torch.Tensor, masked_only: bool = True) -> torch.Tensor:
    """(M, hidden) final hidden states at the ``selected`` (B, T) positions, in ``hidden[selected]`` order: the last
    layer at those positions only where the encoder allows it (and ``masked_only``), else the full forward's."""
    if masked_only and bool(selected.any()) and supports_masked_final_layer(body):
        return masked_final_states(body, input_ids, attention_mask, selected)
    return body(input_ids=input_ids, attention_mask=attention_mask).last_hidden_state[selected]


def masked_final_states(body: torch.nn.Module, input_ids: torch.Tensor, attention_mask: torch.Tensor,
                        selected: torch.Tensor) -> torch.Tensor:
    """(M, hidden) final hidden states of the ``selected`` (B, T) positions, in ``hidden[selected]`` order."""
    from transformers.masking_utils import create_bidirectional_mask

    hidden = body.embeddings(input_ids=input_ids)
    layer_mask = create_bidirectional_mask(config=body.config, inputs_embeds=hidden, attention_mask=attention_mask)
    layers = body.encoder.layer
    for layer in layers[:-1]:  # as BertEncoder.forward runs them (no cache, no cross-attention)
        hidden = layer(hidden, layer_mask)
    return _last_layer_at(layers[-1], hidden, attention_mask, selected)


def _last_layer_at(layer: torch.nn.Module, hidden: torch.Tensor, attention_mask: torch.Tensor,
                   selected: torch.Tensor) -> torch.Tensor:
    attn = layer.attention.self
    batch, length, _ = hidden.shape
    heads, size = attn.num_attention_heads, attn.attention_head_size
    rows, cols = selected.nonzero(as_tuple=True)  # row-major: the order of hidden[selected]
    rank = torch.cumsum(selected, dim=1)[rows, cols] - 1  # each masked position's place among its row's
    width = int(selected.sum(dim=1).max())
    at_masked = hidden[rows, cols]  # (M, hidden)
    projected = attn.query(at_masked)
    query = projected.new_zeros(batch, width, heads * size)  # padded places attend too; their output is never read
    query = query.index_put((rows, rank), projected).view(batch, width, heads, size).transpose(1, 2)
    key = attn.key(hidden).view(batch, length, heads, size).transpose(1, 2)
    value = attn.value(hidden).view(batch, length, heads, size).transpose(1, 2)
    keys_allowed = None if bool(attention_mask.all()) else attention_mask.bool()[:, None, None, :]
    context = F.scaled_dot_product_attention(query, key, value, attn_mask=keys_allowed,
                                             dropout_p=attn.dropout.p if attn.training else 0.0,
                                             scale=attn.scaling)
    context = context.transpose(1, 2).reshape(batch, width, heads * size)[rows, rank]  # (M, hidden)
    attended = layer.attention.output(context, at_masked)  # dense, dropout, norm of the residual sum
    return layer.output(layer.intermediate(attended), attended)
